"""sql/migrations/postgresql/compat.sql: each SQLite function the common
query files use gives on PostgreSQL what SQLite gives, for the arguments
the queries pass. The reference is SQLite itself (the library the daemon
links, through Python's sqlite3), run on the very same SQL text; the
functions' documentation is sqlite.org/lang_corefunc.html,
lang_datefunc.html, lang_aggfunc.html and json1.html.

    MITILOG_TEST_POSTGRESQL='host=... port=... dbname=... user=...' \
        /usr/bin/python3 -m pytest -q tests/postgresql/test_compat.py
(without MITILOG_TEST_POSTGRESQL a throw-away cluster is started).
"""
import json
import os
import sqlite3

import pytest

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
COMPAT = os.path.join(REPO, "sql", "migrations", "postgresql", "compat.sql")

# A real as the queries pass one (a REAL column): SQLite and PostgreSQL
# both read this type name as a 64-bit float.
R = "CAST(%s AS DOUBLE PRECISION)"

EXPRESSIONS = [
    # iif (lang_corefunc.html#iif): integer and boolean conditions, NULL false
    "iif(1, 'true', 'false')", "iif(0, 'true', 'false')", "iif(NULL IS NULL, 1, 2)",
    "iif(2 < 1, 'a', 'b')", "iif(CAST(NULL AS INTEGER), 'a', 'b')",
    # instr (lang_corefunc.html#instr)
    "instr('dwell_seconds', 'seconds')", "instr('abc', 'x')",
    # strftime and date (lang_datefunc.html): the formats and modifiers of
    # sql/queries, on times as stored (with and without zone, fraction)
    "strftime('%Y-%m-%dT%H:%M:%S', '2026-11-03T14:06:49+00:00')",
    "strftime('%Y-%m-%dT%H:%M:%S', '2026-11-03T14:06:49+02:00')",
    "strftime('%Y-%m-%dT%H:%M:%S', '2026-11-03T01:06:49-05:30')",
    "strftime('%Y-%m-%dT%H:%M:%fZ', '2026-11-03T14:06:49.123Z')",
    "strftime('%Y-%m-%dT%H:%M:%SZ', '2026-11-03T14:06:49.999Z', '-7 days')",
    "strftime('%Y-%m-%dT%H:%M:%SZ', '2026-03-01T00:30:00Z', '-24 hours')",
    "strftime('%Y-%m-%d %H:%M', '2026-11-03 14:06')",
    "strftime('%Y-%m-%d', '2026-11-03')",
    "strftime('%j %w %%', '2026-11-03')",
    "strftime('%s', '2026-11-03T14:06:49Z')",
    "strftime('%Y-%m-%d', 'not a time')", "strftime('%Y-%m-%d', NULL)",
    # a span as seconds since 0001-01-01 turned back into a time
    # (queries/findings/finding_insert.sql)
    "strftime('%Y-%m-%dT%H:%M:%S', 1721425.5 + 63900000123 / 86400.0)",
    "strftime('%Y-%m-%dT%H:%M:%S', 1721425.5 + 63913046399 / 86400.0)",
    "strftime('%Y-%m-%dT%H:%M:%S', 1721425.5 + CAST(NULL AS INTEGER) / 86400.0)",
    "date('2026-11-05', '-6 days', 'weekday 1')", "date('2026-11-02', '-6 days', 'weekday 1')",
    "date('2026-11-08', '-6 days', 'weekday 1')", "date('2026-11-01', 'weekday 0')",
    "date('2026-12-29', '+3 days')", "date('2026-02-28', '+1 day')",
    "date('2028-02-28', '+1 day')", "date('2026-11-08', '-' || 6 || ' days')",
    "date('2026-11-03T23:30:00-02:00', '+0 days')",
    "date('2026-11-03', 'start of day', '+12 hours')",
    # julianday and unixepoch: the idle-time arithmetic of exams_due_closing.sql
    "julianday('2026-11-03T14:06:49Z')", "julianday('2026-11-03T14:06:49.5+01:00')",
    "julianday(1793872800, 'unixepoch')", "julianday('1793872800', 'unixepoch')",
    "(julianday(1793872800, 'unixepoch') - julianday('2026-11-05T08:00:00.250Z')) * 86400.0",
    "unixepoch('2026-11-03T14:06:49.999Z')", "unixepoch('1970-01-01T00:00:00Z')",
    "julianday('garbage')",
    # printf (lang_corefunc.html#printf, printf.html): the patterns of
    # review_worklist.sql, ingest_status.sql and instance_documents
    "printf('%.1f', " + R % "0.35" + ")", "printf('%.1f', " + R % "0.25" + ")",
    "printf('%.1f', " + R % "0.45" + ")", "printf('%.1f', " + R % "2.675" + ")",
    "printf('%.1f', " + R % "1.05" + ")", "printf('%.1f', " + R % "12.0" + ")",
    "printf('%.1f', " + R % "-1.25" + ")", "printf('%.1f', " + R % "0.7" + ")",
    "printf('%.1f', " + R % "1234.56" + ")",
    "printf('%g', " + R % "0.35" + ")", "printf('%g', " + R % "1234567.0" + ")",
    "printf('%g', " + R % "0.0001" + ")", "printf('%g', " + R % "0.00001234" + ")",
    "printf('%g', " + R % "100.0" + ")", "printf('%g', " + R % "2.5e-5" + ")",
    "printf('%g', " + R % "1e15" + ")", "printf('%g', " + R % "0.7" + ")",
    "printf('%g', " + R % "45.5" + ")", "printf('%g', " + R % "120.0" + ")",
    "printf('%d', " + R % "2.7" + ")", "printf('%d', " + R % "-2.7" + ")", "printf('%d', 12)",
    "printf('%04X', 255)", "printf('%04X', 12288)", "printf('%02d', 5)", "printf('%02d', 45)",
    "printf('-%d hours', 24)", "printf('-%d days', 7 - 1)",
    # json and the aggregates (json1.html): compared parsed, see below
    "json('{\"a\":[1,2,{\"b\":null}]}')", "json(NULL)",
    "(SELECT json_group_array(x) FROM (SELECT 1 AS x UNION ALL SELECT 2 UNION ALL SELECT 3) t)",
    "(SELECT json_group_array(x) FROM (SELECT 'a' AS x UNION ALL SELECT NULL) t)",
    "(SELECT json_group_array(x) FROM (SELECT 1 AS x) t WHERE x = 2)",
    "(SELECT json_group_array(json(x)) FROM (SELECT '{\"k\":1}' AS x) t)",
    "(SELECT json_group_object(k, v) FROM (SELECT 'mi' AS k, 1.5 AS v UNION ALL "
    "SELECT 'tib', 2) t)",
    "(SELECT json_group_object(k, v) FROM (SELECT 'a' AS k, 1 AS v) t WHERE v = 2)",
    "(SELECT group_concat(x, ',') FROM (SELECT 'v1' AS x UNION ALL SELECT NULL "
    "UNION ALL SELECT 'v2') t)",
    "(SELECT group_concat(x, ',') FROM (SELECT 'v1' AS x) t WHERE x = 'none')",
    "json_set(json('{\"a\":1,\"b\":2}'), '$.c', json('[3]'))",
    "json_set(json('{\"a\":1,\"b\":2}'), '$.a', json('\"x\"'), '$.d', json(NULL))",
    "json_set(json('{\"a\":{\"b\":{}}}'), '$.c', json('{\"d\":[]}'))",
    "json_set(json('{\"x\":{\"a\":2}}'), '$.a', json('3'))",
    "json_set(json('{}'), '$.a', json(NULL))",
    # bit sets (instance_documents): bigint >> bigint
    "(12288 >> CAST(12 AS BIGINT)) & 1", "(12288 >> CAST(11 AS BIGINT)) & 1",
]


@pytest.fixture
def compat(postgresql):
    with open(COMPAT, encoding="utf-8") as f:
        postgresql.cursor().execute(f.read())
    return postgresql


def normalise(value):
    """JSON text parsed (the documents must be equal once parsed), other
    values as they are; PostgreSQL's numeric as a float."""
    import decimal
    if isinstance(value, decimal.Decimal):
        return float(value)
    if isinstance(value, str) and value[:1] in ("[", "{"):
        return json.loads(value)
    if isinstance(value, (dict, list)):
        return value
    return value


@pytest.mark.parametrize("expression", EXPRESSIONS)
def test_same_answer_as_sqlite(compat, expression):
    import psycopg2.extras
    psycopg2.extras.register_default_json(loads=lambda text: text, conn_or_curs=compat)
    expected = sqlite3.connect(":memory:").execute("SELECT " + expression).fetchone()[0]
    cursor = compat.cursor()
    cursor.execute("SELECT " + expression)
    answered = cursor.fetchone()[0]
    expected, answered = normalise(expected), normalise(answered)
    if isinstance(expected, float) and isinstance(answered, float):
        # julianday: both compute milliseconds / 86400000.0
        assert answered == expected
    else:
        assert answered == expected, "%s: SQLite %r, PostgreSQL %r" % (expression, expected,
                                                                      answered)


def test_now_is_utc_with_milliseconds(compat):
    """'now' is the current UTC time with milliseconds (lang_datefunc.html,
    "now"): both engines' texts have the same shape and lie within a few
    seconds of each other."""
    import datetime
    expression = "strftime('%Y-%m-%dT%H:%M:%fZ', 'now')"
    expected = sqlite3.connect(":memory:").execute("SELECT " + expression).fetchone()[0]
    cursor = compat.cursor()
    cursor.execute("SET TimeZone = 'America/New_York'")  # the session's zone must not matter
    cursor.execute("SELECT " + expression)
    answered = cursor.fetchone()[0]
    parse = lambda t: datetime.datetime.strptime(t, "%Y-%m-%dT%H:%M:%S.%fZ")  # noqa: E731
    assert len(answered) == len(expected) == 24
    assert abs((parse(answered) - parse(expected)).total_seconds()) < 60


def test_compat_runs_twice(compat):
    """The migration runner applies compat.sql at every start: a second
    run over objects that views depend on succeeds."""
    cursor = compat.cursor()
    cursor.execute("CREATE VIEW uses_compat AS SELECT json_group_array(x) AS a, "
                   "iif(1, 'x', 'y') AS b, (CAST(4 AS BIGINT) >> CAST(1 AS BIGINT)) AS c "
                   "FROM (SELECT 1 AS x) t")
    with open(COMPAT, encoding="utf-8") as f:
        cursor.execute(f.read())
    cursor.execute("SELECT a::text, b, c FROM uses_compat")
    assert cursor.fetchone() == ("[1]", "x", 2)
