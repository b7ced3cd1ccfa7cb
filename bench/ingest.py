#!/usr/bin/python3
"""Ingest throughput: storescu -> DCMTK storescp (files) vs mitilog serve.

The same simulated files are sent with N concurrent storescu processes
(one association each, many files per association) over loopback to
  (a) storescp --fork -od /tmp/...  (one child process per association,
      so N associations are received at once), and
  (b) mitilog serve, retention = header, each C-STORE answered after the
      commit that holds its row (group commit), data directory in /tmp,
      durability process by default: a commit survives the daemon being
      killed, not a power loss, the guarantee storescp gives (it writes
      files without syncing them); --durability power_loss syncs the WAL
      before every answer.
Wall time from the first sender's start to the last sender's exit.
Repeats alternate the servers (a b a b ...); the median is reported.
After each mitilog run the database must hold exactly the expected number
of instances, and storescp's folder exactly the expected number of files,
or the script fails.

    /usr/bin/python3 bench/ingest.py --matrix 640x480
                                      # 3,798 objects of department size (~8.5 GB)
    /usr/bin/python3 bench/ingest.py              # the same 3,798 objects with
                                      # tiny pixels (31 MB): per-object cost only
    /usr/bin/python3 bench/ingest.py --tiny       # seconds, for CI
"""
import argparse
import json
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402


def one_run(server, paths, senders, size):
    server.start()
    try:
        cpu_before = server.cpu_seconds() if isinstance(
            server, benchlib.Mitilog) else None
        elapsed, codes, errors = benchlib.run_senders(
            server.port, benchlib.split(paths, senders))
        cpu = (server.cpu_seconds() - cpu_before
               if cpu_before is not None else None)
        if isinstance(server, benchlib.Mitilog):
            status = server.stop()
            stored = server.count()
            rejected = server.count("rejections")
            what = "mitilog"
        else:
            status = 0
            stored = server.count()
            rejected = 0
            what = "storescp"
        if any(codes) or status != 0 or stored != len(paths) or rejected:
            detail = b"".join(errors).decode(errors="replace")[-2000:]
            if isinstance(server, benchlib.Mitilog):
                detail += server.log_tail()
            raise SystemExit(
                "ingest: %s run invalid: senders exited %s, server %s, "
                "%d of %d stored, %d rejected\n%s"
                % (what, codes, status, stored, len(paths), rejected, detail))
    finally:
        server.close()
    return {"seconds": elapsed, "objects_per_second": len(paths) / elapsed,
            "mb_per_second": size / elapsed / 1e6,
            "server_cpu_ms_per_object":
                cpu * 1000 / len(paths) if cpu is not None else None}


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--days", type=int, default=3,
                        help="simulated days (3 = ~3,800 objects)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--limit", type=int, default=None,
                        help="use only the first N files")
    parser.add_argument("--senders", default="1,2,4",
                        help="comma-separated concurrencies")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--durability", default="process",
                        choices=["power_loss", "process"],
                        help="mitilog's [storage] durability (default process: "
                             "storescp does not sync either)")
    parser.add_argument("--matrix", default=None,
                        help="pixel matrix of the simulated single frames, e.g. "
                             "640x480 (default: the simulator's tiny one)")
    parser.add_argument("--retention", default="header",
                        choices=("none", "header", "full"),
                        help="mitilog's [storage] retention (default header)")
    parser.add_argument("--data-root", default="/tmp",
                        help="where mitilog's temporary data directory is "
                             "made (default /tmp; /dev/shm shows the cost "
                             "of the disk)")
    parser.add_argument("--tiny", action="store_true",
                        help="1 day, 200 files, 1 repeat, 1 and 2 senders")
    parser.add_argument("--json", default=os.path.join(benchlib.OUT,
                                                       "ingest.json"))
    args = parser.parse_args()
    if args.tiny:
        args.days, args.limit, args.repeats, args.senders = 1, 200, 1, "1,2"
        args.json = os.path.join(benchlib.OUT, "ingest-tiny.json")
    benchlib.require_tools("storescu", "storescp", "echoscu")
    binary = benchlib.mitilog_binary()
    paths, size = benchlib.file_set(binary, args.days, args.seed, args.limit, args.matrix)
    benchlib.header("ingest throughput")
    benchlib.log("file set: %d objects, %.1f MB (simulate --days %d --seed %d%s)"
                 % (len(paths), size / 1e6, args.days, args.seed,
                    " --matrix " + args.matrix if args.matrix else ""))
    benchlib.log("storescp --fork -pdu 65536 (files in /tmp) vs mitilog serve "
                 "(retention %s, durability %s, ack after commit, data in %s); "
                 "TCP_NODELAY=1; %d repeats, a-b alternating"
                 % (args.retention, args.durability, args.data_root, args.repeats))
    results = []
    for senders in [int(s) for s in args.senders.split(",")]:
        samples = {"storescp": [], "mitilog": []}
        for repeat in range(args.repeats):
            for name in ("storescp", "mitilog"):
                server = (benchlib.Storescp() if name == "storescp"
                          else benchlib.Mitilog(binary, args.retention,
                                                  root=args.data_root,
                                                  durability=args.durability))
                sample = one_run(server, paths, senders, size)
                samples[name].append(sample)
                benchlib.log("  senders %d repeat %d %-8s %7.0f objects/s "
                             "%6.1f MB/s" % (senders, repeat + 1, name,
                                             sample["objects_per_second"],
                                             sample["mb_per_second"]))
        row = {"senders": senders}
        for name, runs in samples.items():
            row[name] = {
                "objects_per_second": benchlib.median(
                    [r["objects_per_second"] for r in runs]),
                "mb_per_second": benchlib.median(
                    [r["mb_per_second"] for r in runs]),
                "runs": runs}
        cpu = [r["server_cpu_ms_per_object"] for r in samples["mitilog"]]
        row["mitilog"]["server_cpu_ms_per_object"] = benchlib.median(cpu)
        row["ratio"] = (row["mitilog"]["objects_per_second"] /
                        row["storescp"]["objects_per_second"])
        results.append(row)
    benchlib.log("")
    benchlib.log("| senders | storescp objects/s | storescp MB/s | "
                 "mitilog objects/s | mitilog MB/s | ratio mitilog/storescp "
                 "| mitilog CPU ms/object |")
    benchlib.log("|---:|---:|---:|---:|---:|---:|---:|")
    for row in results:
        benchlib.log("| %d | %.0f | %.1f | %.0f | %.1f | %.2f | %.3f |" % (
            row["senders"], row["storescp"]["objects_per_second"],
            row["storescp"]["mb_per_second"],
            row["mitilog"]["objects_per_second"],
            row["mitilog"]["mb_per_second"], row["ratio"],
            row["mitilog"]["server_cpu_ms_per_object"]))
    os.makedirs(os.path.dirname(args.json), exist_ok=True)
    with open(args.json, "w") as f:
        json.dump({"machine": benchlib.machine(), "objects": len(paths), "matrix": args.matrix,
                   "retention": args.retention, "durability": args.durability, "data_root": args.data_root,
                   "bytes": size, "results": results}, f, indent=1)
    benchlib.log("results written to %s" % os.path.relpath(args.json))


if __name__ == "__main__":
    main()
