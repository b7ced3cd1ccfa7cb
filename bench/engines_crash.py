#!/usr/bin/python3
"""SIGKILL of the PostgreSQL server during a 4-sender ingest: objects
acknowledged but missing afterwards must be 0.

One `mitilog serve` on a PostgreSQL database (a throw-away cluster,
tests/postgresql/cluster.sh, fsync on), four storescu senders at once, each
sending its share of the simulated files and, after a failure, what of it
was not yet acknowledged. At seeded moments (after a given number of
Success answers) the postmaster is killed with SIGKILL (`cluster.sh kill`:
the server loses its processes and shared memory, as in a crash of its
machine short of the disk), left down for --down-seconds, then started
again (crash recovery replays its write-ahead log). While it is down the
receiver must answer A700 (out of resources: PS3.4 B.2.3) and recover by
itself when the server is back. At the end every acknowledged object must
be in the database exactly once; any other answer than Success or A700
fails the run.

    /usr/bin/python3 bench/engines_crash.py                 # 4 x 1,250 objects, 5 kills
    /usr/bin/python3 bench/engines_crash.py --kills 12 --seed 2
    /usr/bin/python3 bench/engines_crash.py --tiny          # 4 x 40 objects, 1 kill (CI)

A build without the PostgreSQL engine says so and measures nothing.
"""
import argparse
import csv
import json
import os
import random
import sys
import threading
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
sys.path.insert(0, os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))),
                                "tests", "integration"))
import benchlib  # noqa: E402
import sending  # noqa: E402  (storescu with a status per file)

A700 = "Refused: OutOfResources"


def uids_of(days, seed, paths):
    folder = os.path.join(benchlib.OUT, "sim-d%d-s%d" % (days, seed))
    uids = {}
    with open(os.path.join(folder, "manifest.csv")) as f:
        for row in csv.DictReader(f):
            uids[os.path.join(folder, "files", row["path"])] = row["sop_instance_uid"]
    return {path: uids[path] for path in paths}


def stored_uids(conninfo):
    import psycopg2  # Debian's python3-psycopg2
    connection = psycopg2.connect(conninfo)
    try:
        with connection.cursor() as cursor:
            cursor.execute("SELECT sop_instance_uid, count(*) FROM instances "
                           "GROUP BY sop_instance_uid")
            return dict(cursor.fetchall())
    finally:
        connection.close()


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--senders", type=int, default=4)
    parser.add_argument("--per-sender", type=int, default=1250)
    parser.add_argument("--kills", type=int, default=5)
    parser.add_argument("--down-seconds", type=float, default=2.0,
                        help="how long the server stays down after each kill")
    parser.add_argument("--seed", type=int, default=1, help="the kill moments")
    parser.add_argument("--port", type=int, default=None,
                        help="the PostgreSQL server's port (default: a free one)")
    parser.add_argument("--tiny", action="store_true", help="4 x 40 objects, 1 kill")
    parser.add_argument("--json", default=os.path.join(benchlib.OUT, "engines_crash.json"))
    args = parser.parse_args()
    if args.tiny:
        args.per_sender, args.kills = 40, 1
        args.json = os.path.join(benchlib.OUT, "engines_crash-tiny.json")
    benchlib.require_tools("storescu", "echoscu")
    binary = benchlib.mitilog_binary()
    benchlib.header("SIGKILL of PostgreSQL during ingest")
    if not benchlib.has_postgresql_engine(binary):
        benchlib.log("this build of mitilog has no PostgreSQL engine: nothing measured")
        return
    total = args.senders * args.per_sender
    days = max(1, -(-total // 1000))   # the simulated department: about 1,070 objects a day
    paths, _ = benchlib.file_set(binary, days, 1)
    if len(paths) < total:
        raise SystemExit("engines_crash: the file set has %d objects, %d wanted"
                         % (len(paths), total))
    paths = paths[:total]
    uids = uids_of(days, 1, paths)
    rng = random.Random(args.seed)
    thresholds = sorted(rng.sample(range(total // 10, total * 9 // 10), args.kills))

    server = benchlib.Postgresql(port=args.port).start()
    conninfo = server.database("crash")
    receiver = benchlib.Mitilog(binary, connection=conninfo, level="info").start()
    acknowledged, other, lock = set(), [], threading.Lock()
    progress = threading.Condition(lock)
    done = threading.Event()
    kills = []

    def on_status(path, status):
        with progress:
            if status == "Success":
                acknowledged.add(path)
            else:
                other.append((path, status))
            progress.notify_all()

    def killer():
        for threshold in thresholds:
            with progress:
                progress.wait_for(lambda: len(acknowledged) >= threshold or done.is_set())
                if done.is_set():
                    return
                at = len(acknowledged)
            server.kill()
            time.sleep(args.down_seconds)
            started = time.monotonic()
            server.start()
            kills.append({"after_acknowledged": at,
                          "restart_seconds": round(time.monotonic() - started, 2)})
            benchlib.log("  killed PostgreSQL after %d acknowledged; back after %.1f s"
                         % (at, time.monotonic() - started + args.down_seconds))

    def sender(index, group):
        for _ in range(args.kills * 20 + 20):
            with lock:
                remaining = [p for p in group if p not in acknowledged]
            if not remaining:
                return
            sending.wait_for_echo(receiver.port)
            sending.storescu_statuses(receiver.port, remaining, calling="SENDER%d" % index,
                                      on_status=on_status)
            time.sleep(0.5)

    started = time.monotonic()
    kill_thread = threading.Thread(target=killer)
    kill_thread.start()
    threads = [threading.Thread(target=sender, args=(i, g))
               for i, g in enumerate(benchlib.split(paths, args.senders))]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    done.set()
    with progress:
        progress.notify_all()
    kill_thread.join()
    elapsed = time.monotonic() - started
    status = receiver.stop()
    stored = stored_uids(conninfo)
    missing = sorted(uids[p] for p in acknowledged if uids[p] not in stored)
    doubled = sorted(u for u, n in stored.items() if n > 1)
    unexpected = [(p, s) for p, s in other if not s.startswith(A700)]
    log_tail = receiver.log_tail(40)
    receiver.close()
    server.stop()
    record = {"machine": benchlib.machine(), "senders": args.senders, "objects": total,
              "kills": kills, "down_seconds": args.down_seconds, "seed": args.seed,
              "seconds": round(elapsed, 1), "acknowledged": len(acknowledged),
              "refused_a700": len(other) - len(unexpected), "other_answers": len(unexpected),
              "stored": len(stored), "acknowledged_missing": len(missing),
              "stored_twice": len(doubled), "receiver_exit": status}
    benchlib.log("")
    benchlib.log("| senders | objects | kills | acknowledged | A700 answers | stored | "
                 "acknowledged but missing | stored twice | seconds |")
    benchlib.log("|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    benchlib.log("| %d | %d | %d | %d | %d | %d | **%d** | %d | %.0f |" % (
        args.senders, total, len(kills), len(acknowledged), record["refused_a700"],
        len(stored), len(missing), len(doubled), elapsed))
    os.makedirs(os.path.dirname(args.json), exist_ok=True)
    with open(args.json, "w") as f:
        json.dump(record, f, indent=1)
    benchlib.log("results written to %s" % os.path.relpath(args.json))
    problems = []
    if missing:
        problems.append("%d acknowledged objects are missing: %s" % (len(missing), missing[:5]))
    if doubled:
        problems.append("%d objects are stored twice" % len(doubled))
    if unexpected:
        problems.append("answers other than Success or A700: %s" % unexpected[:5])
    if len(acknowledged) != total:
        problems.append("only %d of %d objects were ever acknowledged (the receiver did "
                        "not recover?)" % (len(acknowledged), total))
    if len(kills) != args.kills:
        problems.append("%d of %d kills happened" % (len(kills), args.kills))
    if status != 0:
        problems.append("the receiver exited with %s after SIGTERM" % status)
    if problems:
        raise SystemExit("engines_crash: " + "; ".join(problems) + "\n" + log_tail)


if __name__ == "__main__":
    main()
