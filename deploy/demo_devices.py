#!/usr/bin/python3
"""The demo's administrator: sets up the screen profile of each simulated
scanner the way docs/screen-reading.md describes, and sums up what was
read from the pixels.

    demo_devices.py learn --binary B --config C --images DIR [--only DEVICE]
                          [--skip DEVICE] [--by NAME]
    demo_devices.py summary --database DB [--wait SECONDS]

learn: devices that already have an active profile are left as they are.
DIR holds images written by `mitilog simulate --screens` and its
manifest.csv. For each device (manifest column `device`: one per scanner
and software version), the fewest images whose screens together show all
ten digits and the point (at most 12) are given to `mitilog device learn`
under the device's key, and the profile is activated. A scanner that
writes the indices into its header is learned from its files alone (the
header values are the typed values), from images whose header is not
planted stale. A scanner that writes none (the pixels-only room) needs the
values typed as its screens show them: the demo types them from the
manifest, the simulator's record of what it drew, and says so. mitilog
itself never reads the manifest.

summary: once the reading queue is empty (or after --wait seconds),
prints how many index values were read from the pixels, per room, and the
most common reasons a screen was not read. Reads the database only.
"""
import argparse
import collections
import csv
import json
import os
import re
import sqlite3
import subprocess
import sys
import time

INDICES = ["mi", "tis", "tib", "tic"]


def drawn(row):
    """The values the screen shows, as typed: {"MI": "1.2", ...}."""
    values = {}
    for name in INDICES:
        match = re.search(r"([0-9]+\.[0-9]+)$", row.get(name + "_text") or "")
        if match:
            values[name.upper()] = match.group(1)
    return values


def choose(rows):
    """The fewest rows whose values show every digit and the point."""
    chosen, seen = [], set()
    while seen < set("0123456789.") and len(chosen) < 12:
        best = max(rows, key=lambda r: len(set("".join(drawn(r).values())) - seen))
        new = set("".join(drawn(best).values())) - seen
        if not new:
            break
        chosen.append(best)
        seen |= new
    return chosen


def run(command):
    return subprocess.run(command, capture_output=True, text=True, timeout=600)


def learn(options):
    with open(os.path.join(options.images, "manifest.csv"), newline="") as f:
        rows = [r for r in csv.DictReader(f) if r.get("device") and drawn(r)]
    by_device = collections.OrderedDict()
    for row in rows:
        by_device.setdefault(row["device"], []).append(row)
    listed = run([options.binary, "device", "list", "--config", options.config])
    active = set()
    if listed.returncode == 0:
        active = {p["key"] for p in json.loads(listed.stdout or "[]") if p["state"] == "active"}
    failed = 0
    for device, device_rows in by_device.items():
        if options.only and device not in options.only:
            continue
        if device in (options.skip or []):
            continue
        if device in active:
            print("devices: %s (%s) already has an active profile" % (device, device_rows[0]["room"]))
            continue
        pixels_only = device_rows[0]["header_indices"] == "0"
        usable = [r for r in device_rows if "header-mismatch" not in r["planted"]]
        chosen = choose(usable)
        files = [os.path.join(options.images, r["path"]) for r in chosen]
        command = [options.binary, "device", "learn", "--config", options.config,
                   "--key", device]
        typed = []
        for row, path in zip(chosen, files):
            typed.append("--value")
            typed.append("%s:%s" % (path, ",".join("%s=%s" % kv for kv in drawn(row).items())))
        how = ("values typed from the simulator's manifest (the device writes none into "
               "its header)" if pixels_only else "values from the images' headers")
        result = run(command + (typed if pixels_only else []) + files)
        if result.returncode != 0 and not pixels_only:
            # The header holds an index the screen does not show (or not
            # the ones it shows): type the values shown, as an
            # administrator would.
            how = "values typed from the simulator's manifest (its header differs from its screen)"
            result = run(command + typed + files)
        room = device_rows[0]["room"]
        if result.returncode != 0:
            failed += 1
            reason = (result.stderr.strip().splitlines() or ["?"])[-1]
            print("devices: %s (%s) not set up: learning refused it from %d image(s): %s"
                  % (device, room, len(files), reason))
            continue
        activated = run([options.binary, "device", "activate", "--config", options.config,
                         "--by", options.by, device])
        if activated.returncode != 0:
            failed += 1
            print("devices: %s (%s) learned but not activated: %s"
                  % (device, room, activated.stderr.strip()))
            continue
        print("devices: %s (%s) learned from %d image(s), %s; active"
              % (device, room, len(files), how))
    return 0 if failed == 0 or options.allow_refused else 1


def summary(options):
    database = sqlite3.connect("file:%s?mode=ro" % options.database, uri=True, timeout=30)
    deadline = time.monotonic() + options.wait
    while True:
        (queued,) = database.execute("SELECT count(*) FROM reading_queue").fetchone()
        if queued == 0 or time.monotonic() > deadline:
            break
        time.sleep(1)
    statuses = " + ".join("(r.%s_status = 'read')" % name for name in INDICES)
    rows = database.execute(
        "SELECT i.station_name, count(*), sum(r.state = 'read'), sum(%s), "
        "sum(r.state = 'not_read') FROM screen_readings r "
        "JOIN instances i ON i.id = r.instance_id GROUP BY 1 ORDER BY 1" % statuses).fetchall()
    total = sum(row[3] or 0 for row in rows)
    print("  Read from the pixels: %d index values on %d captures%s"
          % (total, sum(row[2] or 0 for row in rows),
             " (%d still waiting to be read)" % queued if queued else ""))
    for room, captures, read, values, not_read in rows:
        print("    %-14s %6d captures: %6d read (%d values), %6d not read"
              % (room or "?", captures, read or 0, values or 0, not_read or 0))
    for reason, count in database.execute(
            "SELECT reason, count(*) FROM screen_readings WHERE state = 'not_read' "
            "GROUP BY 1 ORDER BY 2 DESC LIMIT 3"):
        print("    not read %d: %s" % (count, reason))
    return 0


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    commands = parser.add_subparsers(dest="command", required=True)
    learning = commands.add_parser("learn")
    learning.add_argument("--binary", required=True)
    learning.add_argument("--config", required=True)
    learning.add_argument("--images", required=True)
    learning.add_argument("--only", action="append")
    learning.add_argument("--skip", action="append")
    learning.add_argument("--by", default="demo administrator")
    learning.add_argument("--allow-refused", action="store_true",
                          help="exit 0 even when a device's learning was refused")
    summing = commands.add_parser("summary")
    summing.add_argument("--database", required=True)
    summing.add_argument("--wait", type=float, default=600)
    options = parser.parse_args()
    return learn(options) if options.command == "learn" else summary(options)


if __name__ == "__main__":
    sys.exit(main())
