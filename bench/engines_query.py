#!/usr/bin/python3
"""Dashboard query latency by store: the same database on SQLite and on
PostgreSQL side by side, and a group's ten departments on PostgreSQL.

The SQLite database is bench/make_db.py's (the real pipeline: simulated
traffic imported with `mitilog import`, exams closed); the PostgreSQL one
is a copy of it made with `mitilog copy-database` (which checks the row
count and a checksum of the key columns of every table), so both engines
answer over the same rows. For the 10-million size the 1-million copy is
then repeated nine more times inside PostgreSQL by SQL (INSERT ... SELECT
per table: each copy a department of its own, its UIDs suffixed, its ids
offset, its site names suffixed; the same days, rooms, presets and values,
so the distributions stay the simulator's). Each view is loaded with wrk
as bench/query.py does (one connection, --seconds per view after a
one-second warm-up; every reply must be 200); p50 and p95 per view and
engine, and PostgreSQL's ratio to SQLite, are printed and written to
bench/out/engines_query-<date>.json.

    /usr/bin/python3 bench/engines_query.py                          # 1,000,000 instances, both engines
    /usr/bin/python3 bench/engines_query.py --instances 10000000     # PostgreSQL, ten departments (minutes)
    /usr/bin/python3 bench/engines_query.py --tiny                   # 2 days, both engines, for CI

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

SIZES = {1000000: (310, 3, 1), 10000000: (310, 3, 10)}   # days, sites, copies


def copy_to_postgresql(binary, source, conninfo):
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
            if kind in ("integer", "bigint") and (column == "id" or column.endswith("_id")):
                (value,), = server.execute('SELECT coalesce(max("%s"), 0) FROM "%s"'
                                           % (column, table), database)
                largest = max(largest, value)
    offset = largest + 1
    statements = []
    for table, cols in sorted(tables.items()):
        names, values = [], []
        for column, kind in cols:
            names.append('"%s"' % column)
            if kind in ("integer", "bigint") and (column == "id" or column.endswith("_id")):
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


def serve_and_measure(server, views, seconds, connections):
    server.start()
    try:
        return [dict(query.measure(server.http_port, path, seconds, connections), endpoint=name)
                for name, path in views]
    finally:
        server.stop()
        server.close()


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--instances", default="1000000",
                        help="comma-separated sizes among %s" % ",".join(str(s) for s in SIZES))
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--seconds", type=int, default=10, help="wrk run per view")
    parser.add_argument("--connections", type=int, default=1)
    parser.add_argument("--port", type=int, default=None,
                        help="the PostgreSQL server's port (default: a free one)")
    parser.add_argument("--tiny", action="store_true", help="2 days, 1 second per view")
    args = parser.parse_args()
    benchlib.require_tools("wrk")
    if args.tiny:
        runs, args.seconds = [(2, 1, 1)], 1
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
    sizes = []
    for days, sites, copies in runs:
        source = query.prepare(days, args.seed, sites)
        instances, studies, first_day, last_day, busiest = query.facts(source)
        views = query.endpoints(first_day, last_day, busiest)
        row = {"days": days, "sites": sites, "copies": copies, "engines": {}}
        if copies == 1:
            sqlite_server = benchlib.Mitilog(binary, retention="none")
            os.makedirs(sqlite_server.data, exist_ok=True)
            benchlib.copy_database(source, sqlite_server.database)
            query.migrate(binary, sqlite_server.config)
            row["engines"]["sqlite"] = {
                "instances": instances, "studies": studies,
                "views": serve_and_measure(sqlite_server, views, args.seconds, args.connections)}
        if postgresql is not None:
            conninfo = postgresql.database("query")
            name = conninfo.split("dbname=")[1].split()[0]
            facts = {"copy_seconds": round(copy_to_postgresql(binary, source, conninfo), 1)}
            if copies > 1:
                # the views stay the first department's days and busiest exam
                facts["replicate_seconds"] = round(replicate(postgresql, name, copies), 1)
            facts["instances"], facts["studies"] = postgresql_facts(postgresql, name)
            pg_server = benchlib.Mitilog(binary, retention="none", connection=conninfo)
            facts["views"] = serve_and_measure(pg_server, views, args.seconds, args.connections)
            row["engines"]["postgresql"] = facts
            postgresql.execute("DROP DATABASE %s" % name)
        sizes.append(row)
    print("| instances | engine | %s |" % " | ".join("%s p50 / p95 ms" % n for n in query.ENDPOINTS))
    print("|---:|---|" + "---:|" * len(query.ENDPOINTS))
    for row in sizes:
        for engine, facts in row["engines"].items():
            print("| %d | %s | %s |" % (facts["instances"], engine, " | ".join(
                "%.1f / %.1f" % (v["p50_ms"], v["p95_ms"]) for v in facts["views"])))
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
