#!/usr/bin/python3
"""Dashboard query latency by store: the same rows in SQLite and in
PostgreSQL side by side, and ten times as many in PostgreSQL.

A department's database is bench/make_db.py's (the real pipeline:
simulated traffic imported with `mitilog import`; --days, default 93:
about 100,000 instances). It is copied into PostgreSQL with `mitilog
copy-database` (which checks the row count and a checksum of the key
columns of every table); then, in each engine, its rows are repeated by
SQL into more departments (--departments; a bulk INSERT ... SELECT per
table, in PostgreSQL over generate_series, in SQLite over a recursive
count): each further department has its UIDs suffixed, its ids offset and
its site names suffixed, and the same days, rooms, presets and values, so
the distributions stay the simulator's and both engines hold the same rows.
Each view is asked once alone (its document made from the rows: the
"made" time), then loaded with wrk as bench/query.py does (one connection,
--seconds per view after a one-second warm-up; every reply must be 200),
which the daemon answers from the kept document while the data does not
change. The made time, p50 and p95 per view and engine, and PostgreSQL's
ratio to SQLite, are printed and written to
bench/out/engines_query-<date>.json.

    /usr/bin/python3 bench/engines_query.py                         # 1,000,000 instances, both engines
    /usr/bin/python3 bench/engines_query.py --instances 10000000    # PostgreSQL only, 100 departments
    /usr/bin/python3 bench/engines_query.py --tiny                  # 2 days x 2 departments, for CI

A build without the PostgreSQL engine measures SQLite only and says so.
"""
import argparse
import datetime
import json
import os
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402
import query  # noqa: E402  (the views, wrk, the database facts)

# instances: (departments, engines); a department is make_db.py --days (93)
SIZES = {100000: (1, ("sqlite", "postgresql")), 1000000: (10, ("sqlite", "postgresql")),
         10000000: (100, ("postgresql",))}


def id_like(column, kind):
    return kind in ("integer", "bigint", "INTEGER") and (column == "id" or column.endswith("_id"))


def sqlite_replicate(database, copies):
    """replicate()'s rows in SQLite: the same offsets, suffixes and skips,
    so that both engines hold the same rows."""
    import sqlite3
    started = time.monotonic()
    db = sqlite3.connect(database, isolation_level=None)
    try:
        tables = [t for (t,) in db.execute("SELECT name FROM sqlite_schema WHERE type = 'table' "
                                           "AND name NOT LIKE 'sqlite_%'")]
        columns = {t: [(c, k.upper()) for _, c, k, _, _, _ in
                       db.execute('PRAGMA table_info("%s")' % t)] for t in tables}
        largest = 0
        for table, cols in columns.items():
            for column, kind in cols:
                if id_like(column, kind):
                    (value,) = db.execute('SELECT coalesce(max("%s"), 0) FROM "%s"'
                                          % (column, table)).fetchone()
                    largest = max(largest, value)
        offset = largest + 1
        db.execute("BEGIN")
        for table, cols in sorted(columns.items()):
            values = []
            for column, kind in cols:
                if id_like(column, kind):
                    values.append('t."%s" + (copy - 1) * %d' % (column, offset))
                elif kind == "TEXT" and column.endswith("_uid"):
                    values.append("t.\"%s\" || '.' || copy" % column)
                elif kind == "TEXT" and column == "site":
                    values.append("t.\"%s\" || '-' || copy" % column)
                else:
                    values.append('t."%s"' % column)
            db.execute('INSERT OR IGNORE INTO "%s" (%s) SELECT %s FROM "%s" t, '
                       "(WITH RECURSIVE n(copy) AS (SELECT 2 UNION ALL SELECT copy + 1 FROM n "
                       "WHERE copy < %d) SELECT copy FROM n) AS c"
                       % (table, ", ".join('"%s"' % c for c, _ in cols), ", ".join(values),
                          table, copies))
        db.execute("COMMIT")
        db.execute("ANALYZE")
    finally:
        db.close()
    return time.monotonic() - started


def migrate_in_place(binary, database):
    """copy-database copies only a database at this build's schema
    version: the cached department (made by an earlier build, perhaps) is
    brought up to it first, as opening it with `mitilog report` does."""
    import tempfile
    folder = tempfile.mkdtemp(prefix="mitilog-bench-migrate-", dir="/tmp")
    config = os.path.join(folder, "migrate.ini")
    with open(config, "w") as f:
        f.write("[storage]\ndata_directory = %s\ndatabase = %s\nretention = none\n"
                % (os.path.dirname(database), os.path.basename(database)))
    query.migrate(binary, config)
    os.remove(config)
    os.rmdir(folder)


def copy_to_postgresql(binary, source, conninfo):
    migrate_in_place(binary, source)
    started = time.monotonic()
    result = subprocess.run([binary, "copy-database", "--from", source, "--to", conninfo],
                            stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    if result.returncode != 0:
        raise SystemExit("engines_query: copy-database failed:\n" + result.stdout)
    benchlib.log(result.stdout.rstrip().splitlines()[-1])
    return time.monotonic() - started


def replicate(server, database, copies):
    """Copies 2..copies of every table's rows, inside PostgreSQL: integer
    columns named id or *_id offset by (COPY - 1) x (the largest id + 1), text columns named
    *_uid suffixed ".COPY", site suffixed "-COPY"; rows that collide
    (the vocabulary the store writes at open) are skipped. Foreign keys and
    triggers are not fired meanwhile (session_replication_role = replica),
    the sequences are set past the new ids, and every table analysed."""
    columns = server.execute(
        "SELECT c.table_name, c.column_name, c.data_type FROM information_schema.columns c "
        "JOIN information_schema.tables t ON t.table_name = c.table_name "
        "AND t.table_schema = c.table_schema "
        "WHERE c.table_schema = 'public' AND t.table_type = 'BASE TABLE' "
        "AND c.is_generated = 'NEVER' "
        "AND c.table_name NOT IN (SELECT inhrelid::regclass::text FROM pg_inherits) "
        "ORDER BY c.table_name, c.ordinal_position", database)
    tables = {}
    for table, column, kind in columns:
        tables.setdefault(table, []).append((column, kind))
    # One offset for every id column, so that a reference stays a reference
    # (and fits an integer column: the largest id of all x copies).
    largest = 0
    for table, cols in tables.items():
        for column, kind in cols:
            if id_like(column, kind):
                (value,), = server.execute('SELECT coalesce(max("%s"), 0) FROM "%s"'
                                           % (column, table), database)
                largest = max(largest, value)
    offset = largest + 1
    statements = []
    for table, cols in sorted(tables.items()):
        names, values = [], []
        for column, kind in cols:
            names.append('"%s"' % column)
            if id_like(column, kind):
                values.append('t."%s" + (copy - 1) * %d' % (column, offset))
            elif kind == "text" and column.endswith("_uid"):
                values.append("t.\"%s\" || '.' || copy" % column)
            elif kind == "text" and column == "site":
                values.append("t.\"%s\" || '-' || copy" % column)
            else:
                values.append('t."%s"' % column)
        # One statement per table: its snapshot holds the first department's
        # rows only, so each copy is made from them (generate_series).
        statements.append('INSERT INTO "%s" (%s) OVERRIDING SYSTEM VALUE SELECT %s FROM "%s" t '
                          "CROSS JOIN generate_series(2, %d) AS copy ON CONFLICT DO NOTHING"
                          % (table, ", ".join(names), ", ".join(values), table, copies))
    started = time.monotonic()
    import psycopg2
    connection = psycopg2.connect(server.of(database))
    try:
        with connection.cursor() as cursor:
            cursor.execute("SET session_replication_role = replica")
            for statement in statements:
                cursor.execute(statement)
            connection.commit()
            cursor.execute("SELECT pg_get_serial_sequence(quote_ident(table_name), column_name), "
                           "table_name, column_name FROM information_schema.columns "
                           "WHERE table_schema = 'public' AND (column_default LIKE 'nextval%' "
                           "OR is_identity = 'YES')")
            for sequence, table, column in cursor.fetchall():
                if sequence:
                    cursor.execute('SELECT setval(%%s, (SELECT coalesce(max("%s"), 0) + 1 '
                                   'FROM "%s"), false)' % (column, table), (sequence,))
            connection.commit()
        connection.autocommit = True
        with connection.cursor() as cursor:
            cursor.execute("ANALYZE")
    finally:
        connection.close()
    return time.monotonic() - started


def postgresql_facts(server, database):
    (instances,), = server.execute("SELECT count(*) FROM instances", database)
    (studies,), = server.execute("SELECT count(*) FROM exams", database)
    return instances, studies


def timed_get(port, path):
    """(milliseconds, Mitilog-Document header, body) of one GET."""
    import urllib.request
    url = "http://127.0.0.1:%d%s" % (port, path)
    started = time.monotonic()
    with urllib.request.urlopen(url, timeout=600) as reply:
        body = reply.read()
        if reply.status != 200:
            raise SystemExit("engines_query: %s: status %d" % (path, reply.status))
        header = reply.headers.get("Mitilog-Document")
    return (time.monotonic() - started) * 1000.0, header, body


def measure(port, path, seconds, connections):
    """The first request alone (the document made from the rows: "made"
    in its Mitilog-Document header), then query.measure() with wrk over
    the requests after it (answered from the kept document while the data
    does not change: "kept"). A view whose second request still takes
    more than half a second (wrk's one-second warm-up would then complete
    none) is given the time of that request instead."""
    first_ms, first_header, body = timed_get(port, path)
    json.loads(body)
    second_ms, second_header, _ = timed_get(port, path)
    made = {"first_ms": first_ms, "first_document": first_header,
            "second_document": second_header}
    if second_ms > 500.0:   # half the one-second warm-up of query.measure
        return dict(made, path=path, requests=1, bytes=len(body), p50_ms=second_ms,
                    p95_ms=second_ms, p99_ms=second_ms, max_ms=second_ms,
                    note="one request: slower than half of wrk's warm-up")
    return dict(query.measure(port, path, seconds, connections), **made)


def serve_and_measure(server, views, seconds, connections):
    server.start()
    try:
        return [dict(measure(server.http_port, path, seconds, connections), endpoint=name)
                for name, path in views]
    finally:
        server.stop()
        server.close()


def sqlite_facts(database):
    import sqlite3
    with sqlite3.connect("file:%s?mode=ro" % database, uri=True) as db:
        return (db.execute("SELECT count(*) FROM instances").fetchone()[0],
                db.execute("SELECT count(*) FROM exams").fetchone()[0])


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--instances", default="1000000",
                        help="comma-separated sizes among %s" % ",".join(str(s) for s in SIZES))
    parser.add_argument("--days", type=int, default=93,
                        help="a department's days (make_db.py --days; 93 = ~100,000 instances)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--seconds", type=int, default=10, help="wrk run per view")
    parser.add_argument("--connections", type=int, default=1)
    parser.add_argument("--port", type=int, default=None,
                        help="the PostgreSQL server's port (default: a free one)")
    parser.add_argument("--tiny", action="store_true",
                        help="2 days x 2 departments, 1 second per view")
    args = parser.parse_args()
    benchlib.require_tools("wrk")
    if args.tiny:
        args.days, args.seconds = 2, 1
        runs = [(2, ("sqlite", "postgresql"))]
    else:
        sizes = [int(s) for s in args.instances.split(",")]
        if any(s not in SIZES for s in sizes):
            parser.error("--instances: among %s" % ", ".join(str(s) for s in SIZES))
        runs = [SIZES[s] for s in sizes]
    binary = benchlib.mitilog_binary()
    started = datetime.datetime.now()
    benchlib.header("Query latency by store over HTTP (wrk, %d connection, %d s per view)"
                    % (args.connections, args.seconds))
    postgresql = None
    if benchlib.has_postgresql_engine(binary):
        postgresql = benchlib.Postgresql(port=args.port).start()
    else:
        benchlib.log("this build of mitilog has no PostgreSQL engine: SQLite only")
    source = query.prepare(args.days, args.seed, 1)
    _, _, first_day, last_day, busiest = query.facts(source)
    # the views: the department's last days and its busiest exam
    views = query.endpoints(first_day, last_day, busiest)
    sizes = []
    for departments, engines in runs:
        row = {"days": args.days, "departments": departments, "engines": {}}
        if "sqlite" in engines:
            server = benchlib.Mitilog(binary, retention="none")
            os.makedirs(server.data, exist_ok=True)
            benchlib.copy_database(source, server.database)
            query.migrate(binary, server.config)
            facts = {}
            if departments > 1:
                facts["replicate_seconds"] = round(sqlite_replicate(server.database,
                                                                    departments), 1)
            facts["instances"], facts["studies"] = sqlite_facts(server.database)
            facts["database_mb"] = round(os.path.getsize(server.database) / 1e6, 1)
            benchlib.log("SQLite: %d instances, %d studies" % (facts["instances"],
                                                              facts["studies"]))
            facts["views"] = serve_and_measure(server, views, args.seconds, args.connections)
            row["engines"]["sqlite"] = facts
        if postgresql is not None and "postgresql" in engines:
            conninfo = postgresql.database("query")
            name = conninfo.split("dbname=")[1].split()[0]
            facts = {"copy_seconds": round(copy_to_postgresql(binary, source, conninfo), 1)}
            if departments > 1:
                facts["replicate_seconds"] = round(replicate(postgresql, name, departments), 1)
            facts["instances"], facts["studies"] = postgresql_facts(postgresql, name)
            (size,), = postgresql.execute("SELECT pg_database_size(current_database())", name)
            facts["database_mb"] = round(size / 1e6, 1)
            benchlib.log("PostgreSQL: %d instances, %d studies" % (facts["instances"],
                                                                  facts["studies"]))
            server = benchlib.Mitilog(binary, retention="none", connection=conninfo)
            facts["views"] = serve_and_measure(server, views, args.seconds, args.connections)
            row["engines"]["postgresql"] = facts
            postgresql.execute("DROP DATABASE %s" % name)
        if len(row["engines"]) == 2:
            counts = {e: (f["instances"], f["studies"]) for e, f in row["engines"].items()}
            if len(set(counts.values())) != 1:
                raise SystemExit("engines_query: the engines hold different rows: %s" % counts)
        sizes.append(row)
    print("| instances | engine | %s |" % " | ".join("%s: made ms; kept p50 / p95 ms" % n
                                                  for n in query.ENDPOINTS))
    print("|---:|---|" + "---:|" * len(query.ENDPOINTS))
    for row in sizes:
        for engine, facts in row["engines"].items():
            print("| %d | %s | %s |" % (facts["instances"], engine, " | ".join(
                "%.1f; %.1f / %.1f" % (v["first_ms"], v["p50_ms"], v["p95_ms"])
                for v in facts["views"])))
        if len(row["engines"]) == 2:
            sqlite_views = row["engines"]["sqlite"]["views"]
            pg_views = row["engines"]["postgresql"]["views"]
            print("| | ratio p95 PostgreSQL / SQLite | %s |" % " | ".join(
                "%.2f" % (p["p95_ms"] / s["p95_ms"]) for s, p in zip(sqlite_views, pg_views)))
    git = subprocess.run(["git", "-C", benchlib.BENCH, "rev-parse", "--short", "HEAD"],
                         stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    record = {"benchmark": "query latency by store", "started": started.isoformat(timespec="seconds"),
              "machine": benchlib.machine(), "commit": git.stdout.strip() or None,
              "connections": args.connections, "seconds": args.seconds, "sizes": sizes}
    os.makedirs(benchlib.OUT, exist_ok=True)
    path = os.path.join(benchlib.OUT, "engines_query-%s.json" % started.strftime("%Y%m%d-%H%M%S"))
    with open(path, "w") as f:
        json.dump(record, f, indent=1)
    benchlib.log("written %s" % os.path.relpath(path))
    if postgresql is not None:
        postgresql.stop()


if __name__ == "__main__":
    main()
