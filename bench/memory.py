#!/usr/bin/python3
"""Memory of mitilog serve under a sustained feed, and after it.

Two feeders re-send the simulated file set with storescu in a loop, 200
files per association (so associations come and go all the time: a leak
per association shows), for --seconds (default 600); re-sent objects
replace their rows, so the database stays the same size. Then the daemon
idles for --idle-seconds (default 60). VmRSS, VmHWM, VmSize and the thread
count of the serve process are sampled every --interval seconds into a CSV.

Verdict: "flat" when the median RSS of the last fifth of the feed is within
max(2 MB, 5 %) of the median of its second fifth (the first fifth is
warm-up: SQLite's page cache and the allocator's arenas fill), and the RSS
does not grow while the daemon idles: the last idle sample within the
same tolerance of the first. (Right after the feed the daemon rebuilds the
last exams and evaluates the days they touched, reading whole days, which
can fill the read connection's page cache to its configured size; that
first idle sample is reported beside the feed's.) Goal: peak < 100 MB.

    /usr/bin/python3 bench/memory.py                  # 10 min + 1 min idle
    /usr/bin/python3 bench/memory.py --seconds 30 --idle-seconds 10
    /usr/bin/python3 bench/memory.py --tiny           # seconds, for CI
"""
import argparse
import csv
import json
import os
import subprocess
import sys
import threading
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402

CHUNK = 200


def status_fields(pid):
    fields = {}
    with open("/proc/%d/status" % pid) as f:
        for line in f:
            key, _, value = line.partition(":")
            if key in ("VmRSS", "VmHWM", "VmSize"):
                fields[key] = int(value.split()[0])  # kB
            elif key == "Threads":
                fields[key] = int(value)
    return fields


class Feeder(threading.Thread):
    def __init__(self, port, paths, deadline):
        super().__init__(daemon=True)
        self.port, self.paths, self.deadline = port, paths, deadline
        self.sent = 0
        self.failures = 0

    def run(self):
        chunks = [self.paths[i:i + CHUNK]
                  for i in range(0, len(self.paths), CHUNK)]
        while True:
            for chunk in chunks:
                if time.monotonic() >= self.deadline:
                    return
                result = subprocess.run(
                    benchlib.storescu_command(self.port, chunk),
                    env=benchlib.ENV, stdout=subprocess.DEVNULL,
                    stderr=subprocess.DEVNULL)
                if result.returncode != 0:
                    self.failures += 1
                self.sent += len(chunk)


def mb(kilobytes):
    return kilobytes / 1024.0


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--seconds", type=float, default=600)
    parser.add_argument("--idle-seconds", type=float, default=60)
    parser.add_argument("--interval", type=float, default=5)
    parser.add_argument("--days", type=int, default=3)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--feeders", type=int, default=2)
    parser.add_argument("--tiny", action="store_true",
                        help="10 s feed, 3 s idle, 1 s samples, 1 day")
    parser.add_argument("--csv", default=None)
    args = parser.parse_args()
    if args.tiny:
        args.seconds, args.idle_seconds, args.interval, args.days = 10, 3, 1, 1
    stamp = time.strftime("%Y%m%d-%H%M%S")
    if args.csv is None:
        args.csv = os.path.join(benchlib.OUT, "memory-%s.csv" % stamp)
    benchlib.require_tools("storescu", "echoscu")
    binary = benchlib.mitilog_binary()
    paths, size = benchlib.file_set(binary, args.days, args.seed)
    benchlib.header("serve memory under a sustained feed")
    benchlib.log("feed: %d feeders re-sending %d objects (%.1f MB), %d per "
                 "association, for %.0f s, then %.0f s idle; sample every "
                 "%.0f s -> %s" % (args.feeders, len(paths), size / 1e6, CHUNK,
                                   args.seconds, args.idle_seconds,
                                   args.interval, os.path.relpath(args.csv)))
    server = benchlib.Mitilog(binary).start()
    rows = []
    try:
        started = time.monotonic()
        deadline = started + args.seconds
        feeders = [Feeder(server.port, part, deadline)
                   for part in benchlib.split(paths, args.feeders)]
        for feeder in feeders:
            feeder.start()
        end = deadline + args.idle_seconds
        feeding_ended = None
        while True:
            now = time.monotonic()
            alive = any(f.is_alive() for f in feeders)
            if not alive and feeding_ended is None:
                feeding_ended = now
                end = now + args.idle_seconds
            fields = status_fields(server.process.pid)
            rows.append({"seconds": round(now - started, 1),
                         "phase": "feed" if alive else "idle",
                         "objects_sent": sum(f.sent for f in feeders),
                         "vm_rss_kb": fields["VmRSS"],
                         "vm_hwm_kb": fields["VmHWM"],
                         "vm_size_kb": fields["VmSize"],
                         "threads": fields["Threads"]})
            if now >= end:
                break
            time.sleep(min(args.interval, max(0.0, end - time.monotonic())))
        sent = sum(f.sent for f in feeders)
        failures = sum(f.failures for f in feeders)
        feed_seconds = (feeding_ended or time.monotonic()) - started
        if server.stop() != 0:
            raise SystemExit("memory: serve exited with %d\n%s"
                             % (server.process.returncode, server.log_tail()))
        stored, rejected = server.count(), server.count("rejections")
    finally:
        server.close()
    os.makedirs(os.path.dirname(args.csv), exist_ok=True)
    with open(args.csv, "w", newline="") as f:
        writer = csv.DictWriter(f, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)

    feed = [r for r in rows if r["phase"] == "feed"]
    fifth = max(1, len(feed) // 5)
    second = sorted(r["vm_rss_kb"] for r in feed[fifth:2 * fifth] or feed)
    last = sorted(r["vm_rss_kb"] for r in feed[-fifth:])
    early, late = second[len(second) // 2], last[len(last) // 2]
    peak = max(r["vm_hwm_kb"] for r in rows)
    start_rss, end_rss = rows[0]["vm_rss_kb"], rows[-1]["vm_rss_kb"]
    growth = late - early
    idle = [r for r in rows if r["phase"] == "idle"] or rows[-1:]
    idle_growth = idle[-1]["vm_rss_kb"] - idle[0]["vm_rss_kb"]
    flat = (growth <= max(2048, early * 0.05) and
            idle_growth <= max(2048, early * 0.05))
    expected = min(len(paths), sent)
    benchlib.log("objects sent: %d in %.0f s (%.0f/s), %d failed associations;"
                 " database: %d instances, %d rejections"
                 % (sent, feed_seconds, sent / feed_seconds, failures, stored,
                    rejected))
    benchlib.log("RSS: start %.1f MB, feed 2nd fifth %.1f MB, feed last fifth "
                 "%.1f MB, peak (VmHWM) %.1f MB, idle start %.1f MB, after idle %.1f MB; "
                 "threads at end %d, VmSize at end %.0f MB"
                 % (mb(start_rss), mb(early), mb(late), mb(peak),
                    mb(idle[0]["vm_rss_kb"]), mb(end_rss),
                    rows[-1]["threads"], mb(rows[-1]["vm_size_kb"])))
    verdict = "%s; peak %s 100 MB" % (
        "flat (growth %+.1f MB)" % mb(growth) if flat
        else "GROWING (%+.1f MB)" % mb(growth),
        "under" if peak < 100 * 1024 else "OVER")
    benchlib.log("verdict: " + verdict)
    with open(os.path.splitext(args.csv)[0] + ".json", "w") as f:
        json.dump({"machine": benchlib.machine(), "sent": sent,
                   "feed_seconds": feed_seconds, "failures": failures,
                   "stored": stored, "rejected": rejected,
                   "rss_mb": {"start": mb(start_rss), "early": mb(early),
                              "late": mb(late), "peak": mb(peak),
                              "end": mb(end_rss)},
                   "verdict": verdict}, f, indent=1)
    if failures or rejected or stored != expected:
        raise SystemExit("memory: feed invalid (%d failed associations, %d "
                         "rejections, %d of %d instances)"
                         % (failures, rejected, stored, expected))


if __name__ == "__main__":
    main()
