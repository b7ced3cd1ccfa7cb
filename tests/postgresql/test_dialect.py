"""Every statement of sql/queries/ answers the same on PostgreSQL as on
SQLite (docs/postgresql-dialect.md): a database made by the real pipeline
(the simulator's days imported by `mitilog import`, two sites), copied
into PostgreSQL with the schema the PostgreSQL migration runner makes,
then tests/postgresql/compare_queries.py runs every read with the same
parameters on both and every write on both (rolled back), and compares
the rows and the JSON documents once parsed. The reference is SQLite's
answer to the same question.

    MITILOG_BINARY=build/mitilog MITILOG_TEST_POSTGRESQL='...' \\
        /usr/bin/python3 -m pytest -q tests/postgresql/test_dialect.py
"""
import os
import shutil
import subprocess
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
REPO = os.path.abspath(os.path.join(HERE, "..", ".."))
sys.path.insert(0, os.path.join(REPO, "tests"))
import api_snapshot  # noqa: E402  (its configuration writer)


def import_site(binary, work, site, seed, start):
    simulated = os.path.join(work, "sim-%s" % site)
    subprocess.run([binary, "simulate", "--out", simulated, "--days", "2", "--seed", str(seed),
                    "--start", start], check=True, stdout=subprocess.DEVNULL)
    os.unlink(os.path.join(simulated, "manifest.csv"))
    config, _ = api_snapshot.write_config(work, os.path.join(REPO, "conf", "policy.ini"))
    with open(config, "a") as f:
        f.write("\n[receiver]\nsite = %s\n" % site)
    subprocess.run([binary, "import", "--config", config, simulated], check=True,
                   capture_output=True)
    shutil.rmtree(simulated)


def test_every_statement_answers_the_same(tmp_path, postgresql_conninfo):
    binary = os.environ.get("MITILOG_BINARY", os.path.join(REPO, "build", "mitilog"))
    work = str(tmp_path)
    os.makedirs(os.path.join(work, "var"))
    # Two sites in one database, so that the site filters have something
    # to tell apart.
    import_site(binary, work, "north", 5, "2026-11-02")
    import_site(binary, work, "south", 6, "2026-11-04")
    database = os.path.join(work, "var", "mitilog.sqlite3")
    import psycopg2
    connection = psycopg2.connect(postgresql_conninfo)
    connection.autocommit = True
    connection.cursor().execute("DROP DATABASE IF EXISTS mitilog_dialect")
    connection.cursor().execute("CREATE DATABASE mitilog_dialect TEMPLATE template0 "
                                "ENCODING 'UTF8' LOCALE 'C.UTF-8'")
    target = postgresql_conninfo.replace("dbname=mitilog", "dbname=mitilog_dialect")
    assert "dbname=mitilog_dialect" in target
    try:
        result = subprocess.run([sys.executable, os.path.join(HERE, "compare_queries.py"),
                                 "--sqlite", database, "--postgresql", target, "--copy",
                                 "--repo-schema"], capture_output=True, text=True)
    finally:
        connection.cursor().execute("DROP DATABASE IF EXISTS mitilog_dialect WITH (FORCE)")
        connection.close()
    print(result.stdout)
    assert result.returncode == 0, result.stdout + result.stderr
    summary = result.stdout.strip().splitlines()[-1]
    assert summary.startswith("same ") and "different 0; error 0" in summary, summary
