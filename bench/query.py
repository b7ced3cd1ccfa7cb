#!/usr/bin/python3
"""Query latency of the dashboard's endpoints over HTTP, on databases made
by bench/make_db.py, at one or more sizes (the scale curve).

For each size the cached database (settled: its exams closed, see
make_db.py) is copied, brought to the current schema (migrations run on the
copy, timed) and served by `mitilog serve`; each endpoint is then
loaded with wrk (Debian's package; bench/query.lua prints its latency
percentiles): one connection, requests one after another for --seconds
after a one-second warm-up, so a latency is one request's service time
(sending the request to the last byte of the reply). Every reply must be
200 (checked once with a plain client, which also parses the JSON, then by
wrk's count of other statuses). Prints a table and writes it as JSON to
bench/out/query-<date>.json.

Sizes (--instances): 10000 = 9 days, 100000 = 93 days, 1000000 = 310
days at 3 sites (make_db.py --sites 3); the simulated department has
about 1,070 instances and 60 studies a day per site.

    /usr/bin/python3 bench/query.py                                # 1,000,000 instances
    /usr/bin/python3 bench/query.py --instances 10000,100000,1000000  # the scale curve
    /usr/bin/python3 bench/query.py --days 84                      # any make_db size
    /usr/bin/python3 bench/query.py --tiny                         # 2 days, for CI
"""
import argparse
import datetime
import json
import os
import platform
import re
import sqlite3
import subprocess
import sys
import time
import urllib.request

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402
import make_db  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
SIZES = {10000: (9, 1), 100000: (93, 1), 1000000: (310, 3)}
ENDPOINTS = ("weekly outliers", "stats, a quarter", "one exam", "findings filter",
             "drift, 12 weeks")


def prepare(days, seed, sites):
    """The cached database of this size, built if missing and settled (its
    exams closed) when their closing time has passed (make_db.py)."""
    folder = make_db.database_folder(days, seed, sites)
    subprocess.run([sys.executable, os.path.join(HERE, "make_db.py"), "--days", str(days),
                    "--seed", str(seed), "--sites", str(sites)], check=True)
    return os.path.join(folder, "var", "mitilog.sqlite3")


def migrate(binary, config):
    """Opens the store once (a report does), which applies the migrations
    the database lacks; returns the seconds it took."""
    started = time.monotonic()
    subprocess.run([binary, "report", "stats", "--from", "2000-01-01", "--to", "2000-01-01",
                    "--config", config, "--output", os.devnull], check=True,
                   stdout=subprocess.DEVNULL)
    return time.monotonic() - started


def facts(database):
    with sqlite3.connect("file:%s?mode=ro" % database, uri=True) as db:
        instances = db.execute("SELECT count(*) FROM instances").fetchone()[0]
        studies = db.execute("SELECT count(*) FROM exams").fetchone()[0]
        first, last = db.execute("SELECT min(first_acquired_at), max(first_acquired_at) "
                                 "FROM exams").fetchone()
        busiest = db.execute("SELECT study_instance_uid FROM exams "
                             "ORDER BY instance_count DESC, study_instance_uid LIMIT 1"
                             ).fetchone()[0]
    return (instances, studies, datetime.date.fromisoformat(first[:10]),
            datetime.date.fromisoformat(last[:10]), busiest)


def endpoints(first_day, last_day, busiest):
    """The dashboard's four views at the end of the data, and drift: the
    last complete ISO week (the last day's when the data spans less than a
    week; 12-week baseline), the quarter (92 days) ending on the last day,
    the largest study, warnings of the quarter, drift of the 12 weeks
    ending with that week (each against its 12 baseline weeks)."""
    week_day = last_day
    if last_day.isoweekday() != 7 and (last_day - first_day).days >= 7:
        week_day = last_day - datetime.timedelta(days=last_day.isoweekday())
    year, week, _ = week_day.isocalendar()
    start = last_day - datetime.timedelta(days=91)
    return [
        ("weekly outliers", "/api/v1/outliers?week=%d-W%02d&group=preset" % (year, week)),
        ("stats, a quarter", "/api/v1/stats?from=%s&to=%s&by=exam_type" % (start, last_day)),
        ("one exam", "/api/v1/studies/%s" % busiest),
        ("findings filter", "/api/v1/findings?from=%s&to=%s&severity=warning"
         % (start, last_day)),
        ("drift, 12 weeks", "/api/v1/drift?week=%d-W%02d" % (year, week)),
    ]


def wrk(url, seconds, connections):
    result = subprocess.run(["wrk", "-t1", "-c%d" % connections, "-d%ds" % seconds,
                             "--timeout", "60s", "-s", os.path.join(HERE, "query.lua"), url],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    line = [l for l in result.stdout.splitlines() if l.startswith("result ")]
    if result.returncode != 0 or not line:
        raise SystemExit("query: wrk failed on %s:\n%s%s" % (url, result.stdout, result.stderr))
    values = dict((k, int(v)) for k, v in re.findall(r"(\w+)=(\d+)", line[0]))
    if values["errors"] or values["status_errors"] or values["requests"] == 0:
        raise SystemExit("query: %s: %s" % (url, line[0]))
    return values


def measure(port, path, seconds, connections):
    url = "http://127.0.0.1:%d%s" % (port, path)
    with urllib.request.urlopen(url, timeout=120) as reply:
        body = reply.read()
        if reply.status != 200:
            raise SystemExit("query: %s: status %d" % (path, reply.status))
    json.loads(body)   # a JSON document (an empty list of findings is one)
    wrk(url, 1, connections)   # warm-up
    values = wrk(url, seconds, connections)
    return {"path": path, "requests": values["requests"], "bytes": len(body),
            "p50_ms": values["p50_us"] / 1000.0, "p95_ms": values["p95_us"] / 1000.0,
            "p99_ms": values["p99_us"] / 1000.0, "max_ms": values["max_us"] / 1000.0}


def run_size(binary, days, seed, sites, seconds, connections):
    source = prepare(days, seed, sites)
    server = benchlib.Mitilog(binary, retention="none")
    os.makedirs(server.data, exist_ok=True)
    benchlib.copy_database(source, server.database)
    migration_seconds = migrate(binary, server.config)
    size_mb = os.path.getsize(server.database) / 1e6
    instances, studies, first_day, last_day, busiest = facts(server.database)
    server.start()
    try:
        # Exams that became due for closing since the cache was settled are
        # closed by the server's sweep before anything is timed.
        due, still_open, _ = make_db.open_exams(server.database)
        if due:
            benchlib.log("waiting for the closing sweep: %d exam(s) due" % due)
            make_db.wait_closed(server.database, server.process.pid)
        due, still_open, _ = make_db.open_exams(server.database)
        if still_open:
            benchlib.log("warning: %d exam(s) still open; the closing sweep will re-evaluate "
                         "them while this runs if their closing time passes" % still_open)
        results = [dict(measure(server.http_port, path, seconds, connections), endpoint=name)
                   for name, path in endpoints(first_day, last_day, busiest)]
    finally:
        server.stop()
        server.close()
    return {"days": days, "sites": sites, "seed": seed, "instances": instances,
            "studies": studies, "database_mb": round(size_mb, 1),
            "migration_seconds": round(migration_seconds, 1), "open_exams": still_open,
            "endpoints": results}


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--instances", default=None,
                        help="comma-separated sizes among %s (default 1000000)"
                        % ",".join(str(s) for s in SIZES))
    parser.add_argument("--days", type=int, help="instead of --instances: make_db days")
    parser.add_argument("--sites", type=int, default=1, help="with --days (default 1)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--seconds", type=int, default=10, help="wrk run per endpoint")
    parser.add_argument("--connections", type=int, default=1)
    parser.add_argument("--tiny", action="store_true", help="2 days, 1 second each")
    args = parser.parse_args()
    benchlib.require_tools("wrk")
    if args.tiny:
        runs, args.seconds = [(2, 1)], 1
    elif args.days is not None:
        runs = [(args.days, args.sites)]
    else:
        sizes = [int(s) for s in (args.instances or "1000000").split(",")]
        unknown = [s for s in sizes if s not in SIZES]
        if unknown:
            parser.error("--instances: one of %s" % ", ".join(str(s) for s in SIZES))
        runs = [SIZES[s] for s in sizes]
    binary = benchlib.mitilog_binary()
    started = datetime.datetime.now()
    benchlib.header("Query latency over HTTP (wrk, %d connection, %d s per endpoint)"
                    % (args.connections, args.seconds))
    sizes = [run_size(binary, days, args.seed, sites, args.seconds, args.connections)
             for days, sites in runs]
    print("| instances | studies | days x sites | %s |" % " | ".join(
        "%s p50 / p95 ms" % name for name in ENDPOINTS))
    print("|---:|---:|---|" + "---:|" * len(ENDPOINTS))
    for size in sizes:
        print("| %d | %d | %d x %d | %s |" % (
            size["instances"], size["studies"], size["days"], size["sites"],
            " | ".join("%.1f / %.1f" % (e["p50_ms"], e["p95_ms"]) for e in size["endpoints"])))
    for size in sizes:
        print("\n%d instances:" % size["instances"])
        for e in size["endpoints"]:
            print("  %-17s %s  (%d requests, %d bytes)" % (e["endpoint"], e["path"],
                                                          e["requests"], e["bytes"]))
    git = subprocess.run(["git", "-C", HERE, "rev-parse", "--short", "HEAD"],
                         stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    record = {"benchmark": "query latency", "started": started.isoformat(timespec="seconds"),
              "machine": benchlib.machine(), "cpus": os.cpu_count(),
              "python": platform.python_version(), "sqlite": sqlite3.sqlite_version,
              "commit": git.stdout.strip() or None, "tool": "wrk",
              "connections": args.connections, "seconds": args.seconds, "sizes": sizes}
    os.makedirs(benchlib.OUT, exist_ok=True)
    path = os.path.join(benchlib.OUT, "query-%s.json" % started.strftime("%Y%m%d-%H%M%S"))
    with open(path, "w") as f:
        json.dump(record, f, indent=1)
    benchlib.log("written %s" % os.path.relpath(path))


if __name__ == "__main__":
    main()
