#!/usr/bin/python3
"""What a Prometheus scrape of GET /metrics costs, side by side with
GET /healthz (the other monitoring path), on a database made by
bench/make_db.py: the same served copy, the same wrk settings as
bench/query.py (one connection, requests one after another for --seconds
after a one-second warm-up; bench/query.lua prints the percentiles).
/metrics runs one grouped count of the current findings and stats the
database's files on every scrape; /healthz counts instances and studies.
Every reply must be 200; the /metrics body must pass `promtool check
metrics` (Debian's prometheus package). Prints a table with the ratio of
the medians and writes it as JSON to bench/out/metrics-<date>.json.

    /usr/bin/python3 bench/metrics.py                      # 100,000 instances (93 days)
    /usr/bin/python3 bench/metrics.py --instances 10000,100000,1000000
    /usr/bin/python3 bench/metrics.py --tiny               # 2 days, 1 second each, for CI
"""
import argparse
import datetime
import json
import os
import platform
import sqlite3
import subprocess
import sys
import urllib.request

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402
import query  # noqa: E402  (its sizes, database preparation and wrk runner)

HERE = os.path.dirname(os.path.abspath(__file__))


def fetch(port, path):
    with urllib.request.urlopen("http://127.0.0.1:%d%s" % (port, path), timeout=120) as reply:
        if reply.status != 200:
            raise SystemExit("metrics: %s: status %d" % (path, reply.status))
        return reply.read()


def run_size(binary, days, seed, sites, seconds):
    source = query.prepare(days, seed, sites)
    server = benchlib.Mitilog(binary, retention="none")
    os.makedirs(server.data, exist_ok=True)
    benchlib.copy_database(source, server.database)
    query.migrate(binary, server.config)
    with sqlite3.connect("file:%s?mode=ro" % server.database, uri=True) as db:
        instances = db.execute("SELECT count(*) FROM instances").fetchone()[0]
        findings = db.execute("SELECT count(*) FROM findings WHERE superseded = 0"
                              ).fetchone()[0]
    server.start()
    try:
        body = fetch(server.http_port, "/metrics").decode("utf-8")
        check = subprocess.run(["promtool", "check", "metrics"], input=body, text=True,
                               stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
        if check.returncode != 0 or check.stdout.strip():
            raise SystemExit("metrics: promtool check metrics:\n" + check.stdout)
        json.loads(fetch(server.http_port, "/healthz"))
        results = {}
        for path in ("/healthz", "/metrics"):
            url = "http://127.0.0.1:%d%s" % (server.http_port, path)
            query.wrk(url, 1, 1)  # warm-up
            values = query.wrk(url, seconds, 1)
            results[path] = {"requests": values["requests"],
                             "p50_ms": values["p50_us"] / 1000.0,
                             "p95_ms": values["p95_us"] / 1000.0,
                             "max_ms": values["max_us"] / 1000.0}
    finally:
        server.stop()
        server.close()
    return {"days": days, "sites": sites, "seed": seed, "instances": instances,
            "findings": findings, "metrics_bytes": len(body), "paths": results,
            "ratio_p50": results["/metrics"]["p50_ms"] / max(results["/healthz"]["p50_ms"],
                                                             1e-3)}


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--instances", default="100000",
                        help="comma-separated sizes among %s (default 100000)"
                        % ",".join(str(s) for s in query.SIZES))
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--seconds", type=int, default=10, help="wrk run per path")
    parser.add_argument("--tiny", action="store_true", help="2 days, 1 second each")
    args = parser.parse_args()
    benchlib.require_tools("wrk", "promtool")
    if args.tiny:
        runs, args.seconds = [(2, 1)], 1
    else:
        sizes = [int(s) for s in args.instances.split(",")]
        if any(s not in query.SIZES for s in sizes):
            parser.error("--instances: among %s" % ", ".join(str(s) for s in query.SIZES))
        runs = [query.SIZES[s] for s in sizes]
    binary = benchlib.mitilog_binary()
    started = datetime.datetime.now()
    benchlib.header("Scrape cost: /metrics beside /healthz (wrk, 1 connection, %d s each)"
                    % args.seconds)
    sizes = [run_size(binary, days, args.seed, sites, args.seconds) for days, sites in runs]
    print("| instances | current findings | /healthz p50 / p95 ms | /metrics p50 / p95 ms "
          "| /metrics / /healthz (p50) | /metrics bytes |")
    print("|---:|---:|---:|---:|---:|---:|")
    for size in sizes:
        health, scrape = size["paths"]["/healthz"], size["paths"]["/metrics"]
        print("| %d | %d | %.2f / %.2f | %.2f / %.2f | %.2f | %d |" % (
            size["instances"], size["findings"], health["p50_ms"], health["p95_ms"],
            scrape["p50_ms"], scrape["p95_ms"], size["ratio_p50"], size["metrics_bytes"]))
    git = subprocess.run(["git", "-C", HERE, "rev-parse", "--short", "HEAD"],
                         stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    record = {"benchmark": "scrape cost", "started": started.isoformat(timespec="seconds"),
              "machine": benchlib.machine(), "cpus": os.cpu_count(),
              "python": platform.python_version(), "sqlite": sqlite3.sqlite_version,
              "commit": git.stdout.strip() or None, "tool": "wrk",
              "seconds": args.seconds, "sizes": sizes}
    os.makedirs(benchlib.OUT, exist_ok=True)
    path = os.path.join(benchlib.OUT, "metrics-%s.json" % started.strftime("%Y%m%d-%H%M%S"))
    with open(path, "w") as f:
        json.dump(record, f, indent=1)
    benchlib.log("written %s" % os.path.relpath(path))


if __name__ == "__main__":
    main()
