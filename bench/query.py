#!/usr/bin/python3
"""Query latency of the dashboard's endpoints over HTTP, on a database made
by bench/make_db.py (default: a year of simulated traffic).

mitilog serve is started on a copy of the cached database; each endpoint is
requested --requests times in turn (after one warm-up request) with a plain
HTTP client, and p50/p95 (statistics.quantiles, method 'inclusive') are
printed. Latency is wall time from sending the request to the last byte.

    /usr/bin/python3 bench/query.py                 # the 366-day database
    /usr/bin/python3 bench/query.py --tiny          # 2 days, for CI
"""
import argparse
import os
import shutil
import sqlite3
import statistics
import subprocess
import sys
import time
import urllib.request

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402


def fetch(port, path):
    started = time.perf_counter()
    with urllib.request.urlopen("http://127.0.0.1:%d%s" % (port, path), timeout=60) as reply:
        reply.read()
        status = reply.status
    return time.perf_counter() - started, status


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--days", type=int, default=366)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--requests", type=int, default=30)
    parser.add_argument("--tiny", action="store_true")
    args = parser.parse_args()
    if args.tiny:
        args.days, args.requests = 2, 3
    here = os.path.dirname(os.path.abspath(__file__))
    source = os.path.join(here, "out", "db-d%d-s%d" % (args.days, args.seed), "var",
                          "mitilog.sqlite3")
    if not os.path.exists(source):
        subprocess.run([sys.executable, os.path.join(here, "make_db.py"), "--days",
                        str(args.days), "--seed", str(args.seed)], check=True)
    binary = benchlib.mitilog_binary()
    server = benchlib.Mitilog(binary, retention="none")
    os.makedirs(server.data, exist_ok=True)
    shutil.copy(source, server.database)
    with sqlite3.connect(server.database) as db:
        instances = db.execute("SELECT count(*) FROM instances").fetchone()[0]
        studies = db.execute("SELECT count(DISTINCT study_instance_uid) FROM instances").fetchone()[0]
        last = db.execute("SELECT max(acquired_at) FROM instances").fetchone()[0]
        busiest = db.execute(
            "SELECT study_instance_uid FROM instances GROUP BY 1 ORDER BY count(*) DESC LIMIT 1"
        ).fetchone()[0]
    server.start()
    try:
        year, week, _ = __import__("datetime").date.fromisoformat(last[:10]).isocalendar()
        end = last[:10]
        start = (__import__("datetime").date.fromisoformat(end)
                 - __import__("datetime").timedelta(days=91)).isoformat()
        endpoints = [
            ("weekly outliers by preset", "/api/v1/outliers?week=%d-W%02d&group=preset" % (year, week)),
            ("stats by exam type, a quarter", "/api/v1/stats?from=%s&to=%s&by=exam_type" % (start, end)),
            ("one exam", "/api/v1/studies/%s" % busiest),
            ("findings filter", "/api/v1/findings?from=%s&to=%s&severity=warning" % (start, end)),
        ]
        benchlib.header("Query latency: %d instances, %d studies" % (instances, studies))
        print("| endpoint | p50 ms | p95 ms | requests |")
        print("|---|---:|---:|---:|")
        for name, path in endpoints:
            fetch(server.http_port, path)  # warm-up
            times = []
            for _ in range(args.requests):
                seconds, status = fetch(server.http_port, path)
                assert status == 200, (path, status)
                times.append(seconds * 1000)
            cuts = statistics.quantiles(times, n=20, method="inclusive") if len(times) > 1 else times * 19
            print("| %s `%s` | %.1f | %.1f | %d |" % (name, path, statistics.median(times),
                                                      cuts[18], len(times)))
    finally:
        server.stop()
        server.close()


if __name__ == "__main__":
    main()
