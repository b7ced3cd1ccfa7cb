"""Senders for the durability tests: storescu with a per-file status.

storescu -v writes "Sending file: PATH" and then "Received Store Response
(STATUS)" for each object on stderr (DCMTK 3.6.7 storescu, observed);
this module pairs the two so a test knows which objects got Success.
"""

import os
import subprocess
import threading
import time

from conftest import AE_TITLE, DCMTK_ENV, echoscu

SENDING = "I: Sending file: "
RESPONSE = "I: Received Store Response ("


def storescu_statuses(port, files, calling="STORESCU", on_status=None,
                      timeout=300):
    """Sends files on one association (-nh: keep going after a failure).
    Returns {path: status text} for every file that got a response; files
    without an entry got none (association aborted). on_status(path,
    status) is called as responses arrive."""
    cmd = ["storescu", "-v", "-nh", "-R", "-to", "10", "-ta", "10",
           "-td", "60", "-aec", AE_TITLE, "-aet", calling, "127.0.0.1",
           str(port)] + list(files)
    process = subprocess.Popen(cmd, stdout=subprocess.DEVNULL,
                               stderr=subprocess.PIPE, text=True,
                               errors="replace", env=DCMTK_ENV)
    timer = threading.Timer(timeout, process.kill)
    timer.start()
    statuses, current = {}, None
    try:
        for line in process.stderr:
            if line.startswith(SENDING):
                current = line[len(SENDING):].rstrip("\n")
            elif line.startswith(RESPONSE) and current is not None:
                status = line[len(RESPONSE):].rstrip("\n").rstrip(")")
                statuses[current] = status
                if on_status is not None:
                    on_status(current, status)
                current = None
        process.wait()
    finally:
        timer.cancel()
    return statuses


def wait_for_echo(port, deadline_seconds=60):
    """True once the daemon answers C-ECHO."""
    deadline = time.monotonic() + deadline_seconds
    while time.monotonic() < deadline:
        if echoscu(port).returncode == 0:
            return True
        time.sleep(0.2)
    return False


def split(items, parts):
    """Round-robin split of a list into parts lists."""
    return [items[i::parts] for i in range(parts)]


def simulated_files(binary, out, days, seed=1):
    """Runs the simulator; returns (sorted .dcm paths, {path: row})."""
    import csv
    subprocess.run([binary, "simulate", "--out", str(out), "--days",
                    str(days), "--seed", str(seed)], check=True,
                   stdout=subprocess.DEVNULL)
    rows = {}
    with open(os.path.join(str(out), "manifest.csv")) as f:
        for row in csv.DictReader(f):
            rows[os.path.join(str(out), row["path"])] = row
    return sorted(rows), rows
