#!/usr/bin/python3
"""Ingest throughput by store: one receiver into SQLite vs one receiver
into PostgreSQL vs three receivers (three sites) into one PostgreSQL.

The same simulated files are sent by N concurrent storescu processes (one
association each, many files per association) over loopback:
  (a) sqlite        N senders to one `mitilog serve` on an SQLite file;
  (b) postgresql    N senders to one `mitilog serve` on a PostgreSQL database;
  (c) postgresql x3 the same N senders spread over three `mitilog serve`
                    (sites site-1, site-2, site-3) writing one PostgreSQL
                    database.
Every C-STORE is answered after the commit that holds its row, in all
three: SQLite with durability power_loss (the WAL synced before each
answer) by default, PostgreSQL with its default synchronous_commit = on
(the commit's WAL flushed before the server answers). The server is a
throw-away cluster (tests/postgresql/cluster.sh, fsync on) on the same
machine, a fresh database per run. Wall time from the first sender's start
to the last sender's exit; repeats alternate a b c a b c; medians and each
store's ratio to SQLite's are reported. After each run the database must
hold exactly one row per object sent and no rejection, or the script fails.

    /usr/bin/python3 bench/engines_ingest.py --matrix 640x480   # department-size objects
    /usr/bin/python3 bench/engines_ingest.py                    # tiny pixels: per-object cost
    /usr/bin/python3 bench/engines_ingest.py --tiny             # seconds, for CI

A build without the PostgreSQL engine measures (a) only and says so.
"""
import argparse
import json
import os
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402

STORES = ("sqlite", "postgresql", "postgresql x3")


def send(targets):
    """targets: [(port, paths)], one storescu each, all at once; returns the
    wall time and the exit statuses and stderr of the senders."""
    started = time.monotonic()
    senders = [subprocess.Popen(benchlib.storescu_command(port, part), env=benchlib.ENV,
                                stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
               for port, part in targets if part]
    errors = [s.communicate()[1] for s in senders]
    return time.monotonic() - started, [s.returncode for s in senders], errors


def one_run(store, binary, server, paths, senders, size, args):
    receivers = []
    if store == "sqlite":
        receivers.append(benchlib.Mitilog(binary, args.retention, root=args.data_root,
                                          durability=args.durability))
    else:
        connection = server.database()
        count = 3 if store == "postgresql x3" else 1
        for index in range(count):
            receivers.append(benchlib.Mitilog(binary, args.retention, root=args.data_root,
                                              durability=args.durability,
                                              connection=connection,
                                              site="site-%d" % (index + 1)
                                              if count > 1 and args.sites else None))
    try:
        for receiver in receivers:   # one after another: the first makes the tables
            receiver.start()
        parts = benchlib.split(paths, senders)
        targets = [(receivers[i % len(receivers)].port, part) for i, part in enumerate(parts)]
        cpu_before = [r.cpu_seconds() for r in receivers]
        elapsed, codes, errors = send(targets)
        cpu = sum(r.cpu_seconds() - b for r, b in zip(receivers, cpu_before))
        statuses = [r.stop() for r in receivers]
        stored = receivers[0].count()
        rejected = receivers[0].count("rejections")
        if any(codes) or any(statuses) or stored != len(paths) or rejected:
            detail = b"".join(errors).decode(errors="replace")[-2000:]
            detail += "".join(r.log_tail() for r in receivers)
            raise SystemExit("engines_ingest: %s run invalid: senders exited %s, receivers %s, "
                             "%d of %d stored, %d rejected\n%s"
                             % (store, codes, statuses, stored, len(paths), rejected, detail))
    finally:
        for receiver in receivers:
            receiver.close()
    return {"seconds": elapsed, "objects_per_second": len(paths) / elapsed,
            "mb_per_second": size / elapsed / 1e6,
            "receiver_cpu_ms_per_object": cpu * 1000 / len(paths)}


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--days", type=int, default=3, help="simulated days (3 = ~3,800 objects)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--limit", type=int, default=None, help="use only the first N files")
    parser.add_argument("--senders", default="3",
                        help="comma-separated concurrencies (senders in all; with three "
                             "receivers spread over them)")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--durability", default="power_loss", choices=["power_loss", "process"],
                        help="SQLite's [storage] durability (default power_loss: synced "
                             "before each answer, as PostgreSQL's commit)")
    parser.add_argument("--matrix", default=None,
                        help="pixel matrix of the simulated single frames, e.g. 640x480 "
                             "(department size; default: the simulator's tiny one)")
    parser.add_argument("--retention", default="header", choices=("none", "header", "full"))
    parser.add_argument("--data-root", default="/tmp",
                        help="where the receivers' data directories are made")
    parser.add_argument("--port", type=int, default=None,
                        help="the PostgreSQL server's port (default: a free one)")
    parser.add_argument("--tiny", action="store_true", help="1 day, 150 files, 1 repeat, 3 senders")
    parser.add_argument("--json", default=os.path.join(benchlib.OUT, "engines_ingest.json"))
    args = parser.parse_args()
    if args.tiny:
        args.days, args.limit, args.repeats, args.senders = 1, 150, 1, "3"
        args.json = os.path.join(benchlib.OUT, "engines_ingest-tiny.json")
    benchlib.require_tools("storescu", "echoscu")
    binary = benchlib.mitilog_binary()
    stores = list(STORES)
    server = None
    if benchlib.has_postgresql_engine(binary):
        server = benchlib.Postgresql(port=args.port).start()
    else:
        stores = ["sqlite"]
        benchlib.log("this build of mitilog has no PostgreSQL engine: SQLite only")
    args.sites = benchlib.knows_key(binary, "receiver", "site", "site-1")
    if server is not None and not args.sites:
        benchlib.log("this build of mitilog has no [receiver] site: the three receivers "
                     "record the same site")
    paths, size = benchlib.file_set(binary, args.days, args.seed, args.limit, args.matrix)
    benchlib.header("ingest throughput by store")
    benchlib.log("file set: %d objects, %.1f MB (simulate --days %d --seed %d%s); retention %s, "
                 "SQLite durability %s, ack after commit; %d repeats, alternating"
                 % (len(paths), size / 1e6, args.days, args.seed,
                    " --matrix " + args.matrix if args.matrix else "", args.retention,
                    args.durability, args.repeats))
    results = []
    for senders in [int(s) for s in args.senders.split(",")]:
        samples = {store: [] for store in stores}
        for repeat in range(args.repeats):
            for store in stores:
                sample = one_run(store, binary, server, paths, senders, size, args)
                samples[store].append(sample)
                benchlib.log("  senders %d repeat %d %-14s %7.0f objects/s %6.1f MB/s"
                             % (senders, repeat + 1, store, sample["objects_per_second"],
                                sample["mb_per_second"]))
        row = {"senders": senders}
        for store, runs in samples.items():
            row[store] = {
                "objects_per_second": benchlib.median([r["objects_per_second"] for r in runs]),
                "mb_per_second": benchlib.median([r["mb_per_second"] for r in runs]),
                "receiver_cpu_ms_per_object":
                    benchlib.median([r["receiver_cpu_ms_per_object"] for r in runs]),
                "ratio_to_sqlite": None, "runs": runs}
        for store in stores:
            row[store]["ratio_to_sqlite"] = (row[store]["objects_per_second"]
                                             / row["sqlite"]["objects_per_second"])
        results.append(row)
    benchlib.log("")
    benchlib.log("| senders | store | objects/s | MB/s | ratio to SQLite | receivers' CPU ms/object |")
    benchlib.log("|---:|---|---:|---:|---:|---:|")
    for row in results:
        for store in stores:
            benchlib.log("| %d | %s | %.0f | %.1f | %.2f | %.2f |" % (
                row["senders"], store, row[store]["objects_per_second"],
                row[store]["mb_per_second"], row[store]["ratio_to_sqlite"],
                row[store]["receiver_cpu_ms_per_object"]))
    os.makedirs(os.path.dirname(args.json), exist_ok=True)
    with open(args.json, "w") as f:
        json.dump({"machine": benchlib.machine(), "objects": len(paths), "matrix": args.matrix,
                   "retention": args.retention, "sqlite_durability": args.durability,
                   "bytes": size, "stores": stores, "results": results}, f, indent=1)
    benchlib.log("results written to %s" % os.path.relpath(args.json))
    if server is not None:
        server.stop()


if __name__ == "__main__":
    main()
