#!/usr/bin/python3
"""Builds a large mitilog database from simulated traffic, for the query
latency benchmark (bench/query.py).

The simulator is run in chunks of --chunk-days consecutive days, once per
site (--sites N: the department's rooms at N sites, `mitilog simulate
--site`; seed SEED + chunk + 1000 x (site - 1), so UIDs never collide),
each chunk is imported with `mitilog import` (the real pipeline, retention
none, which also builds the exams and evaluates the policy) and its files
deleted, so the disk holds one chunk at a time. The result is cached as
bench/out/db-d<days>-s<seed>[-x<sites>]/var/mitilog.sqlite3 and reused;
--force rebuilds it. Prints the instance and study counts and the build
time.

A department's database holds closed exams (an exam closes when its last
object is older than the policy's closing time, 60 minutes, and is then
evaluated once more, its findings no longer provisional). An import closes
only the exams it received more than that long before it ends, so once
that time has passed, make_db.py (every call, cached or not) runs
`mitilog serve` on the database until its closing sweep has closed them;
until then it says how many are still open and when they are due.

    /usr/bin/python3 bench/make_db.py --days 366             # a year, ~400,000 instances
    /usr/bin/python3 bench/make_db.py --days 310 --sites 3   # ~1,000,000 instances
    /usr/bin/python3 bench/make_db.py --tiny                 # 2 days, for CI
"""
import argparse
import datetime
import os
import re
import shutil
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402

FIRST_DAY = datetime.date(2026, 1, 5)  # a Monday


def database_folder(days, seed, sites=1):
    """Where the database of these options is cached."""
    name = "db-d%d-s%d" % (days, seed)
    if sites > 1:
        name += "-x%d" % sites
    return os.path.join(benchlib.OUT, name)


# Open exams the closing sweep of `mitilog serve` would close now: idle for
# at least the current policy's closing time (exams_due_closing.sql).
DUE = """SELECT count(*),
       (SELECT count(*) FROM exam_context WHERE closed = 0),
       (SELECT min(last_received_at) FROM exam_context WHERE closed = 0)
FROM exam_context
WHERE closed = 0
  AND (julianday('now') - julianday(last_received_at)) * 86400.0
      >= 60.0 * coalesce((SELECT closed_after_idle_minutes FROM policies
                          ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1), 60)"""


def open_exams(database):
    """(exams due for closing now, exams open, oldest open receipt)."""
    with sqlite3.connect("file:%s?mode=ro" % database, uri=True, timeout=30) as db:
        return db.execute(DUE).fetchone()


def wait_closed(database, pid, timeout=3600):
    """Waits until the serve process pid has closed every exam due for
    closing and its CPU time has stopped growing (the re-evaluations are
    done). Returns the seconds waited."""
    started = time.monotonic()
    last_cpu, quiet = None, 0
    while True:
        due, _, _ = open_exams(database)
        with open("/proc/%d/stat" % pid) as f:
            fields = f.read().rsplit(")", 1)[1].split()
        cpu = int(fields[11]) + int(fields[12])
        quiet = quiet + 1 if due == 0 and cpu == last_cpu else 0
        if quiet >= 3:
            return time.monotonic() - started
        if time.monotonic() - started > timeout:
            raise SystemExit("make_db: %d exam(s) still due for closing after %d s"
                             % (due, timeout))
        last_cpu = cpu
        time.sleep(2)


def settle(binary, folder):
    """Brings a built database to the state of a department whose data is
    older than the closing time: every exam closed, its findings final.
    Exams close when their last receipt is older than the policy's closing
    time (60 minutes by default), so right after a build nothing is due;
    once some are, `mitilog serve` runs on the database until its closing
    sweep has re-evaluated them all. Returns (exams still open, minutes
    until the oldest of them is due, or None)."""
    database = os.path.join(folder, "var", "mitilog.sqlite3")
    due, still_open, _ = open_exams(database)
    if due > 0:
        config = os.path.join(folder, "settle.ini")
        with open(config, "w") as f:
            f.write("[dicom]\nport = %d\n\n[http]\naddress = 127.0.0.1\nport = %d\n\n"
                    "[storage]\ndata_directory = %s\nretention = none\n\n"
                    "[log]\nlevel = warning\n" % (benchlib.free_port(), benchlib.free_port(),
                                                   os.path.join(folder, "var")))
        benchlib.log("settling: %d exam(s) due for closing, running mitilog serve" % due)
        process = subprocess.Popen([binary, "serve", "--config", config], env=benchlib.ENV,
                                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        try:
            seconds = wait_closed(database, process.pid)
        finally:
            process.send_signal(signal.SIGTERM)
            process.wait(timeout=600)
        benchlib.log("settled in %.0f s" % seconds)
    due, still_open, oldest = open_exams(database)
    minutes = None
    if still_open:
        with sqlite3.connect("file:%s?mode=ro" % database, uri=True) as db:
            minutes = db.execute(
                "SELECT coalesce((SELECT closed_after_idle_minutes FROM policies "
                "ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1), 60) - "
                "(julianday('now') - julianday(?)) * 1440.0", (oldest,)).fetchone()[0]
    return still_open, minutes


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--days", type=int, default=366)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--sites", type=int, default=1, choices=range(1, 10),
                        metavar="1-9", help="sites of the department (default 1)")
    parser.add_argument("--chunk-days", type=int, default=28)
    parser.add_argument("--force", action="store_true")
    parser.add_argument("--tiny", action="store_true", help="2 days")
    args = parser.parse_args()
    if args.tiny:
        args.days, args.chunk_days = 2, 1
    binary = benchlib.mitilog_binary()
    folder = database_folder(args.days, args.seed, args.sites)
    database = os.path.join(folder, "var", "mitilog.sqlite3")
    done = os.path.join(folder, "complete")
    if os.path.exists(done) and not args.force:
        benchlib.log("cached: %s" % os.path.relpath(database))
    else:
        shutil.rmtree(folder, ignore_errors=True)
        os.makedirs(folder)
        config = os.path.join(folder, "mitilog.ini")
        with open(config, "w") as f:
            f.write("[storage]\ndata_directory = %s\nretention = none\n\n"
                    "[log]\nlevel = warning\n" % os.path.join(folder, "var"))
        started = time.monotonic()
        day, chunk = 0, 0
        while day < args.days:
            days = min(args.chunk_days, args.days - day)
            start = FIRST_DAY + datetime.timedelta(days=day)
            files = tempfile.mkdtemp(prefix="mitilog-db-", dir="/tmp")
            try:
                sites = []
                for site in range(1, args.sites + 1):
                    out = os.path.join(files, "site%d" % site)
                    subprocess.run([binary, "simulate", "--out", out, "--days",
                                    str(days), "--seed",
                                    str(args.seed + chunk + 1000 * (site - 1)),
                                    "--site", str(site),
                                    "--start", start.isoformat()], check=True,
                                   stdout=subprocess.DEVNULL)
                    os.unlink(os.path.join(out, "manifest.csv"))
                    sites.append(out)
                imported_at = time.monotonic()
                result = subprocess.run([binary, "import", "--config", config]
                                        + sites, stdout=subprocess.PIPE,
                                        stderr=subprocess.PIPE)
                import_seconds = time.monotonic() - imported_at
                out = result.stdout.decode(errors="replace").strip()
                if result.returncode != 0 or not re.search(
                        r"rejected 0, not stored 0", out):
                    raise SystemExit("make_db: import of %s failed: %s\n%s"
                                     % (start, out, result.stderr.decode(
                                         errors="replace")[-2000:]))
                held = sqlite3.connect("file:%s?mode=ro" % database, uri=True).execute(
                    "SELECT count(*) FROM instances").fetchone()[0]
                added = int(re.search(r"imported (\d+)", out).group(1))
                benchlib.log("  %s + %d days: %s; import %.1f s, %.0f files/s, %d instances held"
                             % (start, days, out, import_seconds,
                                added / import_seconds, held))
            finally:
                shutil.rmtree(files, ignore_errors=True)
            day += days
            chunk += 1
        open(done, "w").close()
        benchlib.log("built in %.0f s" % (time.monotonic() - started))
    still_open, minutes = settle(binary, folder)
    if still_open:
        benchlib.log("%d exam(s) still open: the next become due for closing in %.0f minutes "
                     "(run make_db.py again then to settle them)" % (still_open, minutes))
    with sqlite3.connect("file:%s?mode=ro" % database, uri=True) as db:
        count = db.execute("select count(*) from instances").fetchone()[0]
        studies = db.execute("select count(distinct study_instance_uid) "
                             "from instances").fetchone()[0]
    benchlib.log("%s: %d instances, %d studies, %.1f MB"
                 % (os.path.relpath(database), count, studies,
                    os.path.getsize(database) / 1e6))


if __name__ == "__main__":
    main()
