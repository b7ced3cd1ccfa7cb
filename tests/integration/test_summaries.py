"""exam_summaries (migration 005) against the tables it summarises.

The period views read one summary row per exam, kept by triggers. These
tests compute the same rows the way the views did before the summaries
existed (ORACLE below: from exams, exam_timeline, instances, exam_context,
exam_measurements and findings directly) and require the rows of
sql/queries/stats_exam_rows.sql, stats_exam_values.sql (both in the Study
Instance UID order the store sorts them into), stats_exam_governing.sql,
stats_finding_counts.sql and stats_policy_info.sql to be identical, value
for value (floats compared exactly), and findings.sql to return the same
document as the full scan it replaced: after an import, after an object is sent again over DICOM with a
changed index, and after each of a series of direct edits of the base
tables (every trigger path: instance value change, move to another study,
deletion, an earlier instance, timeline rewrites, context, measurements, a
new policy, findings).
"""
import glob
import os
import shutil
import sqlite3
import time

import pytest

from conftest import BINARY, REPO, Daemon, run

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
          CROSS JOIN exam_timeline tl ON tl.study_instance_uid = p.study_instance_uid
          CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid) AS t
    GROUP BY t.study_instance_uid
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
       coalesce(d.s07, 0), coalesce(d.s10, 0), coalesce(d.s15, 0), coalesce(d.s20, 0),
       coalesce(k.captures, 0), coalesce(k.indexed, 0),
       (SELECT count(*) FROM findings x
        WHERE x.study_instance_uid = p.study_instance_uid AND x.superseded = 0),
       p.first_acquired_at
FROM period p
LEFT JOIN exam_context c ON c.study_instance_uid = p.study_instance_uid
LEFT JOIN instances f ON f.id = (SELECT j.id FROM instances j
                                 WHERE j.study_instance_uid = p.study_instance_uid
                                 ORDER BY coalesce(j.acquired_at, j.received_at), j.id
                                 LIMIT 1)
LEFT JOIN exam_measurements m ON m.study_instance_uid = p.study_instance_uid
                             AND m.policy_version = (SELECT version FROM current_policy)
LEFT JOIN dwell d ON d.study_instance_uid = p.study_instance_uid
LEFT JOIN counts k ON k.study_instance_uid = p.study_instance_uid
ORDER BY p.study_instance_uid
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
        'period', period, 'evaluated_at', evaluated_at) AS document
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
            ORDER BY 1)),
       (SELECT min(substr(first_acquired_at, 1, 10)) FROM exams),
       (SELECT max(substr(first_acquired_at, 1, 10)) FROM exams)
"""


def query_text(name):
    with open(os.path.join(REPO, "sql", "queries", name)) as f:
        return f.read()


def exact(rows):
    """Rows with floats as their exact repr, so 0.1 + 0.2 != 0.3 shows."""
    return [tuple(repr(v) if isinstance(v, float) else v for v in row) for row in rows]


def zero_as_real(rows):
    """0 and 0.0 are the same number to the reader (sqlite3_column_double)."""
    return [tuple(0.0 if v == 0 and isinstance(v, int) else v for v in row) for row in rows]


def assert_summaries_exact(db, periods=(("0000-00-00", "9999-99-99"),)):
    for first, last in periods:
        for oracle, name in ((ORACLE_EXAM_ROWS, "stats_exam_rows.sql"),
                             (ORACLE_FINDING_COUNTS, "stats_finding_counts.sql"),
                             (ORACLE_POLICY_INFO, "stats_policy_info.sql")):
            expected = db.execute(oracle, (first, last)).fetchall()
            got = db.execute(query_text(name), (first, last)).fetchall()
            if name == "stats_exam_rows.sql":
                got.sort(key=lambda row: row[0].encode())   # the store sorts by UID
            assert exact(zero_as_real(got)) == exact(zero_as_real(expected)), (name, first, last)
        # the short rows statistics read: the same exams and values, in the
        # same order, with one grouping key
        expected = db.execute(ORACLE_EXAM_ROWS, (first, last)).fetchall()
        for key, column in (("", None), ("room", 7), ("preset", 8), ("shift", 9),
                            ("transducer", 10)):
            got = db.execute(query_text("stats_exam_values.sql"), (first, last, key)).fetchall()
            got.sort(key=lambda row: row[-1].encode())
            assert exact(zero_as_real(got)) == exact(zero_as_real(
                [(r[2], r[column] if column else None) + r[5:7] + r[12:20] + (r[0],)
                 for r in expected])), key
        # a weekly baseline: type and governing value of the days before the last
        got = db.execute(query_text("stats_exam_governing.sql"), (first, last)).fetchall()
        assert sorted(exact(got), key=repr) == sorted(
            exact([(r[2], r[5]) for r in expected if r[1] < last]), key=repr)
    assert db.execute("SELECT count(*) FROM exam_summaries").fetchone()[0] == \
        db.execute("SELECT count(*) FROM exams").fetchone()[0]


def clean_count(db):
    return db.execute("SELECT count(*) FROM exam_summaries WHERE s07 IS NOT NULL").fetchone()[0]


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


def test_every_trigger_path_keeps_summaries_exact(imported, tmp_path):
    daemon, _ = imported
    path = str(tmp_path / "edited.sqlite3")
    with daemon.db() as source, sqlite3.connect(path) as target:
        source.backup(target)
    db = sqlite3.connect(path, isolation_level=None)
    db.execute("PRAGMA foreign_keys = ON")
    exams = [r[0] for r in db.execute(
        "SELECT study_instance_uid FROM exams WHERE timed_count >= 4 "
        "ORDER BY study_instance_uid")]
    assert len(exams) >= 12
    columns = [r[1] for r in db.execute("PRAGMA table_info(instances)") if r[1] != "id"]

    def timeline_instance(study, position):
        return one(db, "SELECT i.id, i.sop_instance_uid FROM exam_timeline tl "
                       "JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid "
                       "WHERE tl.study_instance_uid = ? AND tl.position = ?", study, position)

    def edit(*statements):
        db.execute("BEGIN")
        for statement in statements:
            if isinstance(statement, tuple):
                db.execute(*statement)
            else:
                db.execute(statement)
        db.execute("COMMIT")
        assert_summaries_exact(db, (("0000-00-00", "9999-99-99"),
                                    ("2026-11-03", "2026-11-04")))

    # an index value of a timeline capture changes (the governing one and MI)
    iid, _ = timeline_instance(exams[0], 2)
    edit(("UPDATE instances SET tis = coalesce(tis, 0) + 1.3, tis_status = 'ok', "
          "tib = coalesce(tib, 0) + 1.1, tib_status = 'ok', tic = NULL, tic_status = 'missing' "
          "WHERE id = ?", (iid,)))
    assert one(db, "SELECT s07 IS NOT NULL FROM exam_summaries WHERE study_instance_uid = ?",
               exams[0])[0] == 1
    # a capture moves to another study: its old exam's timeline now refers
    # to another study's instance (its sums are read from the timeline)
    iid, _ = timeline_instance(exams[1], 3)
    edit(("UPDATE instances SET study_instance_uid = ? WHERE id = ?", (exams[2], iid)))
    assert one(db, "SELECT s07 IS NULL FROM exam_summaries WHERE study_instance_uid = ?",
               exams[1])[0] == 1
    # ... and its values change there
    edit(("UPDATE instances SET mi = 0.2, mi_status = 'ok', tis = 2.9, tis_status = 'ok', "
          "tib = 2.9, tib_status = 'ok' WHERE id = ?", (iid,)))
    # a capture is deleted
    iid, deleted_sop = timeline_instance(exams[3], 1)
    edit(("DELETE FROM instances WHERE id = ?", (iid,)))
    # a new instance earlier than every other one of its study, in another room
    first = one(db, "SELECT min(coalesce(acquired_at, received_at)) FROM instances "
                    "WHERE study_instance_uid = ?", exams[4])[0]
    edit(("INSERT INTO instances (%s) SELECT %s FROM instances WHERE study_instance_uid = ? "
          "LIMIT 1" % (", ".join(columns), ", ".join(
              {"sop_instance_uid": "sop_instance_uid || '.9'", "acquired_at": "?",
               "room": "'Room 9'", "preset": "'Preset 9'", "study_description": "'NEW FIRST'",
               "tis": "NULL", "tis_status": "'missing'"}.get(c, c) for c in columns)),
          ("2000-01-01T00:00:00", exams[4])))
    assert first > "2000"
    # the deleted SOP Instance UID again, in its old study, with other values
    edit(("INSERT INTO instances (%s) SELECT %s FROM instances WHERE study_instance_uid = ? "
          "LIMIT 1" % (", ".join(columns), ", ".join(
              {"sop_instance_uid": "?", "tis": "2.4", "tis_status": "'ok'", "tib": "2.4",
               "tib_status": "'ok'"}.get(c, c) for c in columns)),
          (deleted_sop, exams[3])))
    # timeline rows deleted, updated, appended out of order
    edit(("DELETE FROM exam_timeline WHERE study_instance_uid = ? AND position = 2",
          (exams[6],)))
    edit(("UPDATE exam_timeline SET attributed_seconds = attributed_seconds * 2.5 "
          "WHERE study_instance_uid = ? AND position = 1", (exams[7],)))
    # an exam rewritten as store_write_exam does: timeline deleted, exam
    # record written, timeline inserted in position order; clean again
    rows = db.execute("SELECT * FROM exam_timeline WHERE study_instance_uid = ? "
                      "ORDER BY position", (exams[7],)).fetchall()
    edit(("DELETE FROM exam_timeline WHERE study_instance_uid = ?", (exams[7],)),
         ("UPDATE exams SET updated_at = 'now', timed_count = ? WHERE study_instance_uid = ?",
          (len(rows), exams[7])),
         *[("INSERT INTO exam_timeline VALUES (?, ?, ?, ?, ?, ?, ?, ?)", row) for row in rows])
    assert one(db, "SELECT s07 IS NOT NULL FROM exam_summaries WHERE study_instance_uid = ?",
               exams[7])[0] == 1
    # the governing index and the first acquisition of an exam change
    edit(("UPDATE exams SET governing_index = iif(governing_index = 'tis', 'tib', 'tis') "
          "WHERE study_instance_uid = ?", (exams[8],)),
         ("UPDATE exams SET first_acquired_at = NULL WHERE study_instance_uid = ?",
          (exams[9],)))
    # ... whose day now comes from the receipts, which change
    edit(("UPDATE instances SET received_at = '2026-12-31T10:00:00.000Z' "
          "WHERE study_instance_uid = ?", (exams[9],)))
    # exam context changed and removed
    edit(("UPDATE exam_context SET room = 'Room 7', transducer = NULL "
          "WHERE study_instance_uid = ?", (exams[10],)),
         ("DELETE FROM exam_context WHERE study_instance_uid = ?", (exams[11],)))
    # measurements changed and removed; a new current policy, measured for one exam
    edit(("UPDATE exam_measurements SET estimated_seconds = 1234.5 "
          "WHERE study_instance_uid = ?", (exams[0],)),
         ("DELETE FROM exam_measurements WHERE study_instance_uid = ?", (exams[1],)))
    edit("INSERT INTO policies (version, name, normalised_text, first_loaded_at) "
         "VALUES ('test-policy', 'test', '', '2999-01-01T00:00:00Z')")
    edit(("INSERT INTO exam_measurements (study_instance_uid, policy_version, "
          "estimated_seconds, evaluated_at) VALUES (?, 'test-policy', 42.25, 'now')",
          (exams[2],)))
    edit("DELETE FROM exam_measurements WHERE policy_version = 'test-policy'",
         "DELETE FROM policies WHERE version = 'test-policy'")
    # findings superseded, deleted, added
    finding = one(db, "SELECT id, study_instance_uid FROM findings "
                      "WHERE study_instance_uid IS NOT NULL AND superseded = 0 LIMIT 1")
    assert finding is not None
    edit(("UPDATE findings SET superseded = 1 WHERE id = ?", (finding[0],)))
    edit(("INSERT INTO findings (study_instance_uid, rule_id, severity, policy_version, "
          "evaluated_at) SELECT ?, 'test_rule', 'advisory', policy_version, 'now' "
          "FROM findings WHERE id = ?", (exams[3], finding[0])))
    edit(("DELETE FROM findings WHERE id = ?", (finding[0],)))
    # the findings filter (findings.sql: candidates by start time) returns
    # what the former full scan did, superseded findings and findings
    # without a start time included
    edit("UPDATE findings SET superseded = 1 WHERE id % 3 = 0",
         "UPDATE findings SET started_at = NULL WHERE id % 5 = 0",
         "UPDATE findings SET started_at = NULL, study_instance_uid = NULL, "
         "period = '2026-11-03' WHERE id % 7 = 0")
    for first, last in ((None, None), ("2026-11-03", "2026-11-03"), (None, "2026-11-03"),
                        ("2026-11-04", None)):
        for severity in (None, "warning", "advisory"):
            for superseded in (0, 1):
                args = (first, last, severity, None, None, None, None, superseded, 1000)
                assert db.execute(query_text("findings.sql"), args).fetchone() == \
                    db.execute(ORACLE_FINDINGS, args).fetchone(), args
    # an exam deleted with everything that refers to it
    edit(("DELETE FROM exam_measurements WHERE study_instance_uid = ?", (exams[11],)),
         ("DELETE FROM findings WHERE study_instance_uid = ?", (exams[11],)),
         ("DELETE FROM exams WHERE study_instance_uid = ?", (exams[11],)))
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
