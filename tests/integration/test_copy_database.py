"""`mitilog copy-database`: a department's SQLite database into an empty
PostgreSQL database, verified; a target that holds data or is at another
schema version refused and left unchanged.

The source is what the real pipeline makes (a simulated day imported with
`mitilog import`); the target a database of the session's throw-away
PostgreSQL server (tests/postgresql/cluster.sh), whichever engine the
rest of the suite runs on. What was copied is checked by independent
readers: Python's sqlite3 on the source file, psycopg2 on the target.
"""
import os
import shutil
import sqlite3

import pytest

from conftest import BINARY, POSTGRESQL, run
from sending import simulated_files

DAYS = 1


@pytest.fixture(scope="module")
def department(module_daemon_factory, tmp_path_factory):
    """An SQLite database of one simulated day, made by `mitilog import`."""
    files_folder = tmp_path_factory.mktemp("copy-sim")
    simulated_files(BINARY, files_folder / "sim", DAYS)
    os.unlink(str(files_folder / "sim" / "manifest.csv"))
    daemon = module_daemon_factory("copy-source", storage=dict(engine="sqlite"))
    result = daemon.import_(str(files_folder / "sim"))
    assert result.returncode == 0, result.stdout + result.stderr
    return daemon.database


def copy(source, conninfo):
    return run([BINARY, "copy-database", "--from", source, "--to", conninfo], timeout=600)


def postgresql_rows(conninfo, sql):
    import psycopg2
    connection = psycopg2.connect(conninfo)
    try:
        with connection.cursor() as cursor:
            cursor.execute(sql)
            return cursor.fetchall()
    finally:
        connection.close()


def sqlite_tables(path):
    with sqlite3.connect("file:%s?mode=ro" % path, uri=True) as db:
        return [name for (name,) in db.execute(
            "SELECT name FROM sqlite_schema WHERE type = 'table' "
            "AND name NOT LIKE 'sqlite_%' ORDER BY name")]


def test_copy_holds_every_row_and_says_so(department, tmp_path):
    conninfo = POSTGRESQL.database_for(str(tmp_path / "target"))
    result = copy(department, conninfo)
    assert result.returncode == 0, result.stdout + result.stderr
    # interface: one line per table, "same" when rows and key checksum agree
    assert "every table has the same rows and key checksum" in result.stdout, result.stdout
    assert "DIFFERENT" not in result.stdout
    tables = sqlite_tables(department)
    assert len(tables) >= 20
    with sqlite3.connect("file:%s?mode=ro" % department, uri=True) as db:
        for table in tables:
            (expected,) = db.execute('SELECT count(*) FROM "%s"' % table).fetchone()
            # reference: psycopg2, an independent PostgreSQL client
            (copied,), = postgresql_rows(conninfo, 'SELECT count(*) FROM "%s"' % table)
            assert copied == expected, table
            assert "  %s " % table in result.stdout
        instances = db.execute(
            "SELECT sop_instance_uid, study_instance_uid, mi, tis, tib, tic, received_at "
            "FROM instances").fetchall()
        findings = db.execute("SELECT id, rule_id, severity, study_instance_uid, "
                              "measured_value, limit_value FROM findings").fetchall()
    assert len(instances) > 1000 and findings
    # the values themselves, not only the counts, came across unchanged
    assert sorted(postgresql_rows(
        conninfo, "SELECT sop_instance_uid, study_instance_uid, mi, tis, tib, tic, received_at "
        "FROM instances")) == sorted(instances)
    assert sorted(postgresql_rows(
        conninfo, "SELECT id, rule_id, severity, study_instance_uid, measured_value, limit_value "
        "FROM findings")) == sorted(findings)
    # PostgreSQL's own key table: one row per instance (re-sends stay one row)
    (keys,), = postgresql_rows(conninfo, "SELECT count(*) FROM instance_keys")
    assert keys == len(instances)
    # the next id continues after the copied ones (PostgreSQL docs, setval):
    # a new row would otherwise collide with a copied one
    (next_id,), = postgresql_rows(conninfo, "SELECT nextval('instances_id_seq')")
    (largest,), = postgresql_rows(conninfo, "SELECT max(id) FROM instances")
    assert next_id > largest


def test_a_target_that_holds_data_is_refused_and_left_unchanged(department, tmp_path):
    conninfo = POSTGRESQL.database_for(str(tmp_path / "target"))
    assert copy(department, conninfo).returncode == 0
    before = postgresql_rows(conninfo, "SELECT count(*), max(id) FROM instances")
    again = copy(department, conninfo)
    # common practice, no source: a second copy must not double the rows
    assert again.returncode == 1, again.stdout + again.stderr
    assert "already holds data" in again.stderr and "nothing was copied" in again.stderr, \
        again.stderr
    assert postgresql_rows(conninfo, "SELECT count(*), max(id) FROM instances") == before


def test_another_schema_version_is_refused(department, tmp_path):
    older = str(tmp_path / "older.sqlite3")
    shutil.copy(department, older)
    with sqlite3.connect(older) as db:
        (version,) = db.execute("PRAGMA user_version").fetchone()
        db.execute("PRAGMA user_version = %d" % (version - 1))
    conninfo = POSTGRESQL.database_for(str(tmp_path / "target"))
    result = copy(older, conninfo)
    assert result.returncode == 1, result.stdout + result.stderr
    assert "schema version %d" % (version - 1) in result.stderr, result.stderr
    assert "open it once with this mitilog" in result.stderr
    # nothing was made in the target
    assert postgresql_rows(conninfo, "SELECT count(*) FROM pg_tables "
                           "WHERE schemaname = 'public'") == [(0,)]


def test_a_missing_source_is_named(tmp_path):
    conninfo = POSTGRESQL.database_for(str(tmp_path / "target"))
    missing = str(tmp_path / "none.sqlite3")
    result = copy(missing, conninfo)
    assert result.returncode == 1
    assert "cannot read the SQLite database %s" % missing in result.stderr, result.stderr
