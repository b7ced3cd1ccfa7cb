#!/usr/bin/python3
"""Ingest at scale: objects/s of `mitilog serve` into databases that
already hold 10k, 100k and 1M instances (the query benchmark's databases,
bench/make_db.py), beside the same objects into an empty one.

For each size the cached database is copied into a fresh data directory
(the copy and its migrations are not timed), `mitilog serve` starts on it
(retention header, durability process, as bench/ingest.py), and a day of
new simulated traffic (`mitilog simulate --days 1 --seed 4242 --start
2027-01-04`: new UIDs, after every day of the databases) is sent with one
storescu, then another such day (seed 4243) with two at once; the count of
instances must grow by exactly the objects sent. Reports objects/s and the
server's CPU per object. How the query side scales: bench/query.py
--instances 10000,100000,1000000.

    /usr/bin/python3 bench/scale.py                           # 0, 10k, 100k, 1M
    /usr/bin/python3 bench/scale.py --instances 0,10000       # some sizes
    /usr/bin/python3 bench/scale.py --tiny                    # 0 and 2 days, 100 files
"""
import argparse
import datetime
import json
import os
import shutil
import sqlite3
import subprocess
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402
import query  # noqa: E402

def day(seed):
    return ("--days", "1", "--seed", str(seed), "--start", "2027-01-04")


def day_files(binary, seed, limit):
    """A day of new traffic (generated once into bench/out/)."""
    folder = os.path.join(benchlib.OUT, "scale-day-s%d" % seed)
    done = os.path.join(folder, "complete")
    if not os.path.exists(done):
        shutil.rmtree(folder, ignore_errors=True)
        os.makedirs(folder)
        subprocess.run([binary, "simulate", "--out", os.path.join(folder, "files")]
                       + list(day(seed)), check=True, stdout=subprocess.DEVNULL)
        os.unlink(os.path.join(folder, "files", "manifest.csv"))
        open(done, "w").close()
    paths = sorted(os.path.join(d, n) for d, _, names in
                   os.walk(os.path.join(folder, "files")) for n in names)
    return paths[:limit] if limit else paths


def count(database):
    with sqlite3.connect("file:%s?mode=ro" % database, uri=True) as db:
        return db.execute("SELECT count(*) FROM instances").fetchone()[0]


def one_size(binary, source, days_sent):
    """Sends each (senders, paths) of days_sent to a server on a copy of
    source (None: an empty database)."""
    server = benchlib.Mitilog(binary, retention="header", durability="process")
    os.makedirs(server.data, exist_ok=True)
    if source is not None:
        benchlib.copy_database(source, server.database)
    server.start()   # applies any migration the copy lacks before it listens
    rows = []
    try:
        held = count(server.database)
        expected = held
        for senders, paths in days_sent:
            expected += len(paths)
            cpu_before = server.cpu_seconds()
            seconds, codes, errors = benchlib.run_senders(server.port,
                                                          benchlib.split(paths, senders))
            cpu = server.cpu_seconds() - cpu_before
            stored = count(server.database)
            if any(codes) or stored != expected:
                raise SystemExit("scale: run invalid: senders exited %s, %d instances, "
                                 "expected %d\n%s%s" % (codes, stored, expected,
                                                        b"".join(errors).decode()[-2000:],
                                                        server.log_tail()))
            rows.append({"senders": senders, "objects": len(paths), "seconds": seconds,
                         "objects_per_second": len(paths) / seconds,
                         "cpu_ms_per_object": cpu * 1000 / len(paths)})
    finally:
        server.stop()
        server.close()
    return held, rows


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--instances", default="0,10000,100000,1000000",
                        help="comma-separated sizes among 0 (empty) and %s"
                        % ",".join(str(s) for s in query.SIZES))
    parser.add_argument("--limit", type=int, default=None, help="send only N files")
    parser.add_argument("--tiny", action="store_true")
    args = parser.parse_args()
    benchlib.require_tools("storescu", "echoscu")
    if args.tiny:
        sizes, args.limit = [(0, None), (2, 1)], 100
    else:
        sizes = []
        for text in args.instances.split(","):
            size = int(text)
            if size != 0 and size not in query.SIZES:
                parser.error("--instances: 0 or one of %s"
                             % ", ".join(str(s) for s in query.SIZES))
            sizes.append((0, None) if size == 0 else query.SIZES[size])
    binary = benchlib.mitilog_binary()
    days_sent = [(1, day_files(binary, 4242, args.limit)), (2, day_files(binary, 4243, args.limit))]
    benchlib.header("ingest at scale")
    for senders, paths in days_sent:
        benchlib.log("sent by %d: %d objects, %.1f MB (simulate %s)"
                     % (senders, len(paths), sum(os.path.getsize(p) for p in paths) / 1e6,
                        " ".join(day(4241 + senders))))
    results = []
    for days, sites in sizes:
        source = query.prepare(days, 1, sites) if days else None
        held, rows = one_size(binary, source, days_sent)
        for row in rows:
            benchlib.log("  %9d instances held, %d sender(s): %6.0f objects/s, "
                         "%.3f ms CPU/object" % (held, row["senders"],
                                                 row["objects_per_second"],
                                                 row["cpu_ms_per_object"]))
        results.append({"instances_held": held, "days": days, "sites": sites, "runs": rows})
    benchlib.log("")
    benchlib.log("| instances held | 1 sender, objects/s | CPU ms/object | "
                 "2 senders, objects/s | CPU ms/object |")
    benchlib.log("|---:|---:|---:|---:|---:|")
    for result in results:
        new, again = result["runs"]
        benchlib.log("| %d | %.0f | %.3f | %.0f | %.3f |" % (
            result["instances_held"], new["objects_per_second"], new["cpu_ms_per_object"],
            again["objects_per_second"], again["cpu_ms_per_object"]))
    out = os.path.join(benchlib.OUT, "scale-%s.json"
                       % datetime.datetime.now().strftime("%Y%m%d-%H%M%S"))
    with open(out, "w") as f:
        json.dump({"machine": benchlib.machine(), "results": results}, f, indent=1)
    benchlib.log("results written to %s" % os.path.relpath(out))


if __name__ == "__main__":
    main()
