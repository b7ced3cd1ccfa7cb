"""exam_summaries (migration 005) against the tables it summarises.

The period views read one summary row per exam, rewritten by the store
whenever it writes the exam. These
tests compute the same rows the way the views did before the summaries
existed (ORACLE below: from exams, exam_timeline, instances, exam_context,
exam_measurements and findings directly) and require the rows of
sql/queries/reports/stats_exam_rows.sql, stats_exam_values.sql (both in the Study
Instance UID order the store sorts them into), stats_exam_governing.sql,
stats_finding_counts.sql and stats_policy_info.sql to be identical, value
for value (floats compared exactly), and findings.sql to return the same
document as the full scan it replaced: after an import, after an object
is sent again over DICOM with a changed index, and after a rescore under
another policy (new findings, new measurements, a new current policy).
"""
import glob
import os
import shutil
import sqlite3
import time

import pytest

from conftest import BINARY, REPO, Daemon, StoreConnection, run

DAYS = 3
SEED = 11

ORACLE_EXAM_ROWS = """
WITH chosen AS (
    SELECT e.*,
           substr(coalesce(e.first_acquired_at,
                           (SELECT min(j.received_at) FROM instances j
                            WHERE j.study_instance_uid = e.study_instance_uid)), 1, 10) AS day
    FROM exams e
),
period AS (SELECT * FROM chosen WHERE day >= ?1 AND day <= ?2),
current_policy AS (
    SELECT version FROM policies ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1
),
counts AS (
    SELECT i.study_instance_uid, count(*) AS captures,
           sum(iif(i.mi IS NOT NULL OR i.tis IS NOT NULL OR i.tib IS NOT NULL
                   OR i.tic IS NOT NULL, 1, 0)) AS indexed
    FROM instances i
    WHERE i.object_kind IN ('image', 'multiframe', 'volume')
      AND i.study_instance_uid IN (SELECT study_instance_uid FROM period)
    GROUP BY i.study_instance_uid
)
SELECT p.study_instance_uid, p.day, p.exam_type, p.exam_type_label, p.governing_index,
       CASE p.governing_index WHEN 'tis' THEN p.max_tis WHEN 'tib' THEN p.max_tib
                              WHEN 'tic' THEN p.max_tic END,
       p.max_mi,
       coalesce(c.room, f.room), coalesce(c.preset, f.preset), coalesce(c.shift, f.shift),
       coalesce(c.transducer, f.transducer_data), f.study_description,
       coalesce(m.estimated_seconds, p.estimated_seconds),
       coalesce(k.captures, 0), coalesce(k.indexed, 0),
       (SELECT count(*) FROM findings x
        WHERE x.study_instance_uid = p.study_instance_uid AND x.superseded = 0),
       p.first_acquired_at,
       -- advisories measured below their own limit (informational), and
       -- the most severe other finding: 3 violation, 2 warning, 1 advisory
       -- at or above its limit, 0 none (docs/api.md, GET /api/v1/stats)
       (SELECT count(*) FROM findings x
        WHERE x.study_instance_uid = p.study_instance_uid AND x.superseded = 0
          AND x.severity = 'advisory' AND x.measured_value < x.limit_value),
       coalesce((SELECT max(iif(x.severity = 'violation', 3,
                            iif(x.severity = 'warning', 2,
                            iif(x.measured_value < x.limit_value, 0, 1))))
                 FROM findings x
                 WHERE x.study_instance_uid = p.study_instance_uid AND x.superseded = 0), 0)
FROM period p
LEFT JOIN exam_context c ON c.study_instance_uid = p.study_instance_uid
LEFT JOIN instances f ON f.id = (SELECT j.id FROM instances j
                                 WHERE j.study_instance_uid = p.study_instance_uid
                                 ORDER BY coalesce(j.acquired_at, j.received_at), j.id
                                 LIMIT 1)
LEFT JOIN exam_measurements m ON m.study_instance_uid = p.study_instance_uid
                             AND m.policy_version = (SELECT version FROM current_policy)
LEFT JOIN counts k ON k.study_instance_uid = p.study_instance_uid
ORDER BY p.study_instance_uid
"""

# Time at or above each governing TI threshold the statistics report, per
# exam of the period: the same exams, summed from the timeline here.
ORACLE_TIMES = """
WITH chosen AS (
    SELECT e.*,
           substr(coalesce(e.first_acquired_at,
                           (SELECT min(j.received_at) FROM instances j
                            WHERE j.study_instance_uid = e.study_instance_uid)), 1, 10) AS day
    FROM exams e
),
period AS (SELECT * FROM chosen WHERE day >= ?1 AND day <= ?2),
dwell AS (
    SELECT t.study_instance_uid,
           sum(iif(t.value >= 0.7, t.attributed_seconds, 0)) AS s07,
           sum(iif(t.value >= 1.0, t.attributed_seconds, 0)) AS s10,
           sum(iif(t.value >= 1.5, t.attributed_seconds, 0)) AS s15,
           sum(iif(t.value >= 2.0, t.attributed_seconds, 0)) AS s20
    FROM (SELECT tl.study_instance_uid, tl.attributed_seconds,
                 CASE p.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                        WHEN 'tic' THEN i.tic END AS value
          FROM period p
          JOIN exam_timeline tl ON tl.study_instance_uid = p.study_instance_uid
          JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid) AS t
    GROUP BY t.study_instance_uid
)
SELECT p.study_instance_uid, x.threshold,
       coalesce(CASE x.threshold WHEN 0.7 THEN d.s07 WHEN 1.0 THEN d.s10
                                 WHEN 1.5 THEN d.s15 WHEN 2.0 THEN d.s20 END, 0)
FROM period p
CROSS JOIN (SELECT 0.7 AS threshold UNION ALL SELECT 1.0 UNION ALL SELECT 1.5
            UNION ALL SELECT 2.0) AS x
LEFT JOIN dwell d ON d.study_instance_uid = p.study_instance_uid
WHERE x.threshold <= ?3
ORDER BY p.study_instance_uid, x.threshold
"""

ORACLE_FINDING_COUNTS = """
SELECT f.study_instance_uid, f.rule_id, count(*)
FROM findings f JOIN exams e ON e.study_instance_uid = f.study_instance_uid
WHERE f.superseded = 0
  AND substr(coalesce(e.first_acquired_at,
                      (SELECT min(j.received_at) FROM instances j
                       WHERE j.study_instance_uid = e.study_instance_uid)), 1, 10)
      BETWEEN ?1 AND ?2
GROUP BY f.study_instance_uid, f.rule_id
ORDER BY f.study_instance_uid, f.rule_id
"""

ORACLE_FINDINGS = """
WITH chosen AS (
    SELECT f.*, substr(coalesce(f.started_at, e.first_acquired_at, f.period), 1, 10) AS day
    FROM findings f LEFT JOIN exams e ON e.study_instance_uid = f.study_instance_uid
    WHERE (?8 OR f.superseded = 0)
      AND (?3 IS NULL OR f.severity = ?3) AND (?4 IS NULL OR f.rule_id = ?4)
      AND (?5 IS NULL OR f.room = ?5) AND (?6 IS NULL OR f.preset = ?6)
      AND (?7 IS NULL OR f.shift = ?7))
SELECT coalesce(json_group_array(json(document)), '[]') FROM (
    SELECT json_object(
        'id', id, 'study_instance_uid', study_instance_uid, 'rule_id', rule_id,
        'severity', severity, 'quantity', quantity, 'measured_value', measured_value,
        'unit', unit, 'limit_value', limit_value, 'threshold', threshold,
        'governing_index', governing_index, 'instance_uids', json(instance_uids),
        'started_at', started_at, 'ended_at', ended_at,
        'estimated_seconds', estimated_seconds, 'assumptions', assumptions,
        'source', source_text,
        'provisional', json(iif(provisional, 'true', 'false')),
        'superseded', json(iif(superseded, 'true', 'false')),
        'policy_version', policy_version, 'exam_type', exam_type, 'room', room,
        'preset', preset, 'shift', shift, 'transducer', transducer,
        'period', period, 'evaluated_at', evaluated_at,
        'site', (SELECT i.site FROM instances i
                 WHERE i.study_instance_uid = chosen.study_instance_uid
                 ORDER BY coalesce(i.acquired_at, i.received_at), i.id LIMIT 1)) AS document
    FROM chosen
    WHERE (?1 IS NULL OR day >= ?1) AND (?2 IS NULL OR day <= ?2)
    ORDER BY day DESC, id DESC LIMIT ?9)
"""

ORACLE_POLICY_INFO = """
SELECT (SELECT version FROM policies ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1),
       (SELECT name FROM policies ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1),
       (SELECT group_concat(version, ',') FROM
           (SELECT DISTINCT f.policy_version AS version
            FROM findings f JOIN exams e ON e.study_instance_uid = f.study_instance_uid
            WHERE f.superseded = 0 AND substr(e.first_acquired_at, 1, 10) BETWEEN ?1 AND ?2
            ORDER BY 1) AS versions),
       (SELECT min(substr(first_acquired_at, 1, 10)) FROM exams),
       (SELECT max(substr(first_acquired_at, 1, 10)) FROM exams)
"""


def on_postgresql(db):
    return isinstance(db, StoreConnection)


def query_text(name, db=None):
    """A query of sql/queries/ by file name, whichever subject folder holds
    it; on PostgreSQL its own text (SUBJECT/postgresql/NAME) when it has one."""
    paths = []
    if on_postgresql(db):
        paths = glob.glob(os.path.join(REPO, "sql", "queries", "*", "postgresql", name))
    if not paths:
        paths = glob.glob(os.path.join(REPO, "sql", "queries", "*", name))
    (path,) = paths
    with open(path) as f:
        return f.read()


def every_site(args, sites=()):
    """The query's own parameters, then its site filter (migration 013):
    :site_count and :site_1 ... :site_16, numbered after the highest ?N."""
    return tuple(args) + (len(sites),) + tuple(sites) + (None,) * (16 - len(sites))


def oracle_text(oracle, db):
    """An oracle as the engine reads it: PostgreSQL keeps the order SQLite's
    rowid gives policies as row_order (sql/migrations/postgresql/012_baseline.sql)."""
    return oracle.replace("rowid DESC", "row_order DESC") if on_postgresql(db) else oracle


def exact(rows, places=None):
    """Rows with floats as their exact repr, so 0.1 + 0.2 != 0.3 shows; with
    places, rounded to so many decimals first (PostgreSQL adds a sum's terms
    in the order of its plan, which moves the last bits of a double: IEEE
    754 addition is not associative)."""
    return [tuple(repr(round(v, places) if places is not None else v)
                  if isinstance(v, float) else v for v in row) for row in rows]


def zero_as_real(rows):
    """0 and 0.0 are the same number to the reader (sqlite3_column_double)."""
    return [tuple(0.0 if v == 0 and isinstance(v, int) else v for v in row) for row in rows]


def assert_summaries_exact(db, periods=(("0000-00-00", "9999-99-99"),)):
    places = 9 if on_postgresql(db) else None
    for first, last in periods:
        for oracle, name in ((ORACLE_EXAM_ROWS, "stats_exam_rows.sql"),
                             (ORACLE_FINDING_COUNTS, "stats_finding_counts.sql"),
                             (ORACLE_POLICY_INFO, "stats_policy_info.sql")):
            expected = db.execute(oracle_text(oracle, db), (first, last)).fetchall()
            got = db.execute(query_text(name, db), every_site((first, last))).fetchall()
            if name == "stats_exam_rows.sql":
                got.sort(key=lambda row: row[0].encode())   # the store sorts by UID
            assert exact(zero_as_real(got), places) == exact(zero_as_real(expected), places), \
                (name, first, last)
        # time at or above the thresholds up to 2.0 (those the statistics show)
        expected = db.execute(oracle_text(ORACLE_TIMES, db), (first, last, 2.0)).fetchall()
        got = db.execute(query_text("stats_exam_time_at_or_above.sql", db),  # no site filter
                         (first, last, 2.0)).fetchall()
        got.sort(key=lambda row: (row[0].encode(), row[1]))
        assert exact(zero_as_real(got), places) == exact(zero_as_real(expected), places), \
            ("times", first, last)
        # the short rows statistics read: the same exams and values, in the
        # same order, with one grouping key
        expected = db.execute(oracle_text(ORACLE_EXAM_ROWS, db), (first, last)).fetchall()
        for key, column in (("", None), ("room", 7), ("preset", 8), ("shift", 9),
                            ("transducer", 10)):
            got = db.execute(query_text("stats_exam_values.sql", db),
                             every_site((first, last, key))).fetchall()
            got.sort(key=lambda row: row[8].encode())
            assert exact(zero_as_real(got), places) == exact(zero_as_real(
                [(r[2], r[column] if column else None) + r[5:7] + r[12:16] + (r[0], r[17])
                 for r in expected]), places), key
        # a weekly baseline: type and governing value of the days before the last
        got = db.execute(query_text("stats_exam_governing.sql", db),
                         every_site((first, last))).fetchall()
        assert sorted(exact(got, places), key=repr) == sorted(
            exact([(r[2], r[5]) for r in expected if r[1] < last], places), key=repr)
    assert db.execute("SELECT count(*) FROM exam_summaries").fetchone()[0] == \
        db.execute("SELECT count(*) FROM exams").fetchone()[0]
    # The site filter: every exam here was taken by the one receiver, site
    # 'main' (the default); asking for it reads them all, asking for a
    # site that took nothing reads none (docs/sites.md). Common practice,
    # no source.
    first, last = periods[0]
    rows = db.execute(query_text("stats_exam_rows.sql", db),
                      every_site((first, last))).fetchall()
    sites = db.execute(query_text("stats_exam_sites.sql", db),
                       every_site((first, last))).fetchall()
    assert rows and sorted(sites) == sorted((row[0], "main") for row in rows)
    for name in ("stats_exam_rows.sql", "stats_exam_sites.sql", "stats_exam_series.sql"):
        assert sorted(db.execute(query_text(name, db), every_site((first, last), ("main",)))
                      .fetchall()) == sorted(db.execute(query_text(name, db),
                                                        every_site((first, last))).fetchall())
        assert db.execute(query_text(name, db),
                          every_site((first, last), ("elsewhere",))).fetchall() == []
    assert {key for _, key, *rest in db.execute(query_text("stats_exam_values.sql", db),
                                                every_site((first, last, "site")))} == {"main"}


def clean_count(db):
    return db.execute("SELECT count(DISTINCT study_instance_uid) FROM exam_time_at_or_above"
                      " WHERE seconds IS NOT NULL").fetchone()[0]


@pytest.fixture(scope="module")
def imported(tmp_path_factory):
    work = tmp_path_factory.mktemp("summaries")
    sim = os.path.join(str(work), "sim")
    result = run([BINARY, "simulate", "--days", str(DAYS), "--seed", str(SEED), "--out", sim],
                 timeout=300)
    assert result.returncode == 0, result.stderr
    os.unlink(os.path.join(sim, "manifest.csv"))
    daemon = Daemon(work)
    result = daemon.import_(sim)
    assert result.returncode == 0, result.stdout + result.stderr
    return daemon, sim


def test_summaries_after_import_are_exact_and_clean(imported):
    daemon, _ = imported
    with daemon.db() as db:
        exams = db.execute("SELECT count(*) FROM exams").fetchone()[0]
        assert exams > 150
        assert_summaries_exact(db, (("0000-00-00", "9999-99-99"), ("2026-11-03", "2026-11-03")))
        # every summary is complete: the views read no timeline
        assert clean_count(db) == exams
        assert db.execute("SELECT count(*) FROM exam_summaries WHERE measured_policy IS NULL"
                          " OR finding_count IS NULL").fetchone()[0] == 0


def one(db, sql, *args):
    return db.execute(sql, args).fetchone()


def copy_of(daemon, tmp_path, name):
    """A copy of the daemon's database (SQLite's backup API) to edit."""
    path = str(tmp_path / name)
    with daemon.db() as source, sqlite3.connect(path) as target:
        source.backup(target)
    return path


@pytest.mark.sqlite_only("rescores a copy of the SQLite file made with its backup API")
def test_rescore_under_another_policy_keeps_summaries_exact(imported, tmp_path):
    """`mitilog rescore` under a stricter policy (a lower TI ceiling): new
    findings, the old ones superseded, the new policy's measurements; the
    summaries the rescore rewrote match the tables."""
    daemon, _ = imported
    work = tmp_path / "rescore"
    os.makedirs(str(work / "var"))
    shutil.copy(copy_of(daemon, tmp_path, "rescored.sqlite3"),
                str(work / "var" / "mitilog.sqlite3"))
    with open(os.path.join(REPO, "conf", "policy.ini")) as f:
        policy = f.read()
    assert "\nlimit = 2.0\n" in policy
    with open(str(work / "policy.ini"), "w") as f:
        f.write(policy.replace("\nlimit = 2.0\n", "\nlimit = 0.9\n", 1))
    config = str(work / "mitilog.ini")
    with open(daemon.config) as f, open(config, "w") as out:
        out.write(f.read().replace("data_directory = var",
                                   "data_directory = %s" % (work / "var")))
        out.write("[rules]\npolicy = %s\n" % (work / "policy.ini"))
    db = sqlite3.connect(str(work / "var" / "mitilog.sqlite3"))
    before = db.execute("SELECT count(*) FROM findings WHERE superseded = 0").fetchone()[0]
    db.close()
    result = run([BINARY, "rescore", "--config", config], timeout=300)
    assert result.returncode == 0, result.stdout + result.stderr
    db = sqlite3.connect(str(work / "var" / "mitilog.sqlite3"))
    try:
        after = db.execute("SELECT count(*) FROM findings WHERE superseded = 0").fetchone()[0]
        assert after > before, (before, after)   # the stricter ceiling finds more
        assert db.execute("SELECT count(DISTINCT measured_policy) FROM exam_summaries"
                          ).fetchone()[0] == 1
        assert_summaries_exact(db, (("0000-00-00", "9999-99-99"), ("2026-11-03", "2026-11-04")))
        assert clean_count(db) == one(db, "SELECT count(*) FROM exams")[0]
    finally:
        db.close()


@pytest.mark.sqlite_only("edits a copy of the SQLite file made with its backup API")
def test_findings_filter_matches_a_full_scan(imported, tmp_path):
    """findings.sql (candidates by start time, through findings_period)
    returns what a full scan of findings does, superseded findings and
    findings without a start time or study included."""
    daemon, _ = imported
    db = sqlite3.connect(copy_of(daemon, tmp_path, "findings.sqlite3"), isolation_level=None)
    db.execute("BEGIN")
    db.execute("UPDATE findings SET superseded = 1 WHERE id % 3 = 0")
    db.execute("UPDATE findings SET started_at = NULL WHERE id % 5 = 0")
    db.execute("UPDATE findings SET started_at = NULL, study_instance_uid = NULL, "
               "period = '2026-11-03' WHERE id % 7 = 0")
    db.execute("COMMIT")
    # Every kind of row the query must handle is present (the simulated
    # department's findings are few: its baseline follows published audits,
    # docs/demo.md); common practice, no source.
    assert one(db, "SELECT count(*) FROM findings")[0] >= 7
    assert one(db, "SELECT count(*) FROM findings WHERE superseded = 1")[0] > 0
    assert one(db, "SELECT count(*) FROM findings WHERE started_at IS NULL "
                   "AND study_instance_uid IS NOT NULL")[0] > 0
    assert one(db, "SELECT count(*) FROM findings WHERE study_instance_uid IS NULL")[0] > 0
    for first, last in ((None, None), ("2026-11-03", "2026-11-03"), (None, "2026-11-03"),
                        ("2026-11-04", None)):
        for severity in (None, "warning", "advisory"):
            for superseded in (0, 1):
                args = (first, last, severity, None, None, None, None, superseded, 1000)
                assert db.execute(query_text("findings.sql", db), every_site(args)).fetchone() == \
                    db.execute(ORACLE_FINDINGS, args).fetchone(), args
    db.close()


def test_objects_sent_again_with_other_values(imported, tmp_path):
    """Over DICOM: every object of one study sent again, one of them with a
    higher TIS; the daemon rewrites the exam and the summaries follow."""
    import pydicom
    daemon, sim = imported
    studies = sorted(glob.glob(os.path.join(sim, "*", "e0*")))
    files = sorted(glob.glob(os.path.join(studies[5], "*.dcm")))
    assert len(files) >= 4
    changed = str(tmp_path / "changed.dcm")
    ds = pydicom.dcmread(files[1])
    changed_uid = ds.SOPInstanceUID
    ds.SoftTissueThermalIndex = "3.3"
    ds.BoneThermalIndex = "3.3"
    ds.save_as(changed)
    with daemon.db() as db:
        before = one(db, "SELECT updated_at FROM exams WHERE study_instance_uid = ?",
                     str(ds.StudyInstanceUID))[0]
    daemon.start()
    try:
        result = daemon.storescu([changed] + files[2:])
        assert result.returncode == 0, result.stderr
        deadline = time.monotonic() + 30
        while True:
            with daemon.db() as db:
                after = one(db, "SELECT updated_at FROM exams WHERE study_instance_uid = ?",
                            str(ds.StudyInstanceUID))[0]
                replaced = one(db, "SELECT replaced_count FROM instances "
                                   "WHERE sop_instance_uid = ?", changed_uid)[0]
            if after != before and replaced == 1:
                break
            assert time.monotonic() < deadline, "exam not rebuilt"
            time.sleep(0.3)
        time.sleep(1.0)   # the evaluation that follows the rebuild
    finally:
        daemon.stop()
    with daemon.db() as db:
        assert_summaries_exact(db)
        assert clean_count(db) == one(db, "SELECT count(*) FROM exams")[0]
