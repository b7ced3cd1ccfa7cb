#!/usr/bin/python3
"""Runs every statement of sql/queries/ on SQLite and on PostgreSQL with
the same parameters and compares the answers: the same rows, and JSON
documents equal after parsing (same keys in the same order, same array
order, integers integers, reals equal to 15 significant digits, nulls
null; docs/postgresql-dialect.md).

    /usr/bin/python3 tests/postgresql/compare_queries.py \
        --sqlite DB.sqlite3 --postgresql 'host=127.0.0.1 port=55420 dbname=mitilog user=mitilog' \
        [--copy [--repo-schema] [--schema FILE ...]] [--only subject/NAME.sql ...]

DB.sqlite3 is a database made by mitilog (e.g. the simulator's days
imported with `mitilog import`, as tests/api_snapshot.py does). With
--copy, the PostgreSQL database is emptied (schema public dropped), the
schema is made (--repo-schema: as the migration runner makes it from this
tree; --schema: these files), reviews, screen readings and a profile
are added to the SQLite file (so give it a copy) and its rows are copied
in. Reads run as they are; writes run on both inside a transaction that
is rolled back, and what they changed is compared (the rows of the table
they write, read back with the same ORDER BY on both); the statements
with no parameter set here are prepared on PostgreSQL (parsed and typed).

Prints one line per statement: "same", "DIFFERENT: where", "ERROR: which
engine and its message", "prepared", "not run" (SQLite's connection
settings: pragmas, checkpoints, transactions, which PostgreSQL's engine
does not run), with "(override)" when PostgreSQL reads its own file.
Exit status 0 when nothing differs and nothing fails.
"""
import argparse
import os
import sqlite3
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import sqlfiles  # noqa: E402

# SQLite's connection settings and file maintenance: the PostgreSQL engine
# does not run these (its connection, transactions and schema version are
# its own; docs/postgresql-dialect.md).
ENGINE_ONLY = {
    "database/checkpoint.sql", "database/foreign_key_check.sql",
    "database/pragma_foreign_keys_off.sql", "database/pragma_foreign_keys_on.sql",
    "database/pragma_journal_wal.sql", "database/pragma_reader.sql",
    "database/pragma_synchronous_full.sql", "database/pragma_synchronous_normal.sql",
    "database/pragma_writer.sql", "database/schema_version.sql",
    "database/read_begin.sql", "database/read_end.sql", "database/write_begin.sql",
    "database/write_commit.sql", "database/write_rollback.sql",
    # copy-database's transaction control and catalog reads: each engine
    # reads its own catalog (tests/integration/test_copy_database.py runs them)
    "copy/begin.sql", "copy/commit.sql", "copy/rollback.sql", "copy/columns.sql",
    "copy/tables.sql",
}

# Statements PostgreSQL has and SQLite has not (store_copy.c runs them on
# PostgreSQL only; the backfill's advisory lock, where SQLite's command
# locks a file instead): an override without a common file is expected here.
POSTGRESQL_ONLY = {
    "copy/postgresql/analyze.sql", "copy/postgresql/instance_keys_fill.sql",
    "copy/postgresql/sequences_reset.sql", "backfill/postgresql/run_lock.sql",
}


def facts(db):
    """Parameter values taken from the SQLite database."""
    one = lambda sql, *a: (db.execute(sql, a).fetchone() or (None,))[0]  # noqa: E731
    f = {}
    f["first_day"] = one("SELECT min(day) FROM exam_summaries WHERE day <> ''")
    f["last_day"] = one("SELECT max(day) FROM exam_summaries WHERE day <> ''")
    f["monday"] = one("SELECT date(min(day), '-6 days', 'weekday 1') FROM exam_summaries "
                      "WHERE day <> ''")
    f["later_monday"] = one("SELECT date(max(day), '-6 days', 'weekday 1') FROM exam_summaries "
                            "WHERE day <> ''")
    f["study"] = one("SELECT study_instance_uid FROM findings WHERE study_instance_uid "
                     "IS NOT NULL ORDER BY id LIMIT 1") or one(
        "SELECT study_instance_uid FROM exams ORDER BY study_instance_uid LIMIT 1")
    f["study2"] = one("SELECT study_instance_uid FROM exams ORDER BY first_acquired_at DESC "
                      "LIMIT 1")
    f["policy"] = one("SELECT version FROM policies ORDER BY first_loaded_at DESC, rowid DESC "
                      "LIMIT 1")
    # the site of the study the seeded reviews and findings belong to, and
    # every site held: the site filters are run with each
    f["site"] = one("SELECT site FROM exam_summaries WHERE study_instance_uid = ?",
                    f["study"]) or "main"
    f["sites"] = [row[0] for row in db.execute(
        "SELECT site FROM instances UNION SELECT site FROM rejections ORDER BY 1")]
    f["sop"] = one("SELECT sop_instance_uid FROM instances ORDER BY id LIMIT 1")
    f["instance_id"] = one("SELECT id FROM instances ORDER BY id LIMIT 1")
    f["received"] = one("SELECT received_at FROM instances ORDER BY received_at LIMIT 1 "
                        "OFFSET (SELECT count(*) / 2 FROM instances)")
    f["now"] = one("SELECT unixepoch(max(received_at)) + 3600 FROM instances")
    f["rule"] = one("SELECT rule_id FROM findings ORDER BY id LIMIT 1")
    f["device_rule"] = one("SELECT rule_id FROM findings WHERE study_instance_uid IS NULL "
                           "ORDER BY id LIMIT 1") or "output_not_reported"
    f["device_period"] = one("SELECT period FROM findings WHERE study_instance_uid IS NULL "
                             "ORDER BY id LIMIT 1") or f["first_day"]
    f["room"] = one("SELECT room FROM findings WHERE room IS NOT NULL ORDER BY id LIMIT 1")
    f["finding"] = one("SELECT id FROM findings ORDER BY id LIMIT 1")
    f["connection"] = db
    f["profile_key"] = one("SELECT profile_key FROM screen_profiles ORDER BY id LIMIT 1") \
        or "absent-profile"
    return f


def reads(f):
    """{query: [parameters, ...]} for the statements that only read."""
    return {
        "database/health.sql": [[]],
        "devices/screen_profile_latest.sql": [{"profile_key": f["profile_key"], "version": 0}],
        "devices/screen_profile_next_version.sql": [{"profile_key": f["profile_key"]}],
        "devices/screen_profiles_active.sql": [[]],
        "devices/screen_profiles_json.sql": [[]],
        "exams/exams_due_closing.sql": [[f["now"], 60], [f["now"], 86400 * 400]],
        "exams/exams_in_period.sql": [[f["first_day"], f["last_day"]], [None, None],
                                      [f["last_day"], None]],
        "exams/mode_names_select.sql": [[]],
        "exams/ti_thresholds_select.sql": [[]],
        "findings/evaluation_hash_device.sql": [[f["device_rule"], f["policy"],
                                                 f["device_period"]]],
        "findings/evaluation_hash_exam.sql": [[f["study"], f["policy"]]],
        "snapshots/snapshot_signature.sql": [[f["first_day"], f["last_day"]],
                                             ["", "9999-12-31"], ["2000-01-01", "2000-01-07"]],
        "snapshots/snapshot_get.sql": [["statistics", "from=a;to=b", "s1"],
                                       ["statistics", "none", "s1"]],
        "snapshots/snapshot_keys.sql": [["2000-01-01T00:00:00.000Z", 10]],
        "findings/findings.sql": [
            [None, None, None, None, None, None, None, 0, 1000],
            [f["first_day"], f["last_day"], None, None, None, None, None, 1, 50],
            [f["first_day"], f["first_day"], "warning", f["rule"], f["room"], None, None, 0, 10],
        ],
        "findings/policy_json.sql": [[f["policy"]]],
        "instances/device_instances.sql": [[f["first_day"]], [f["last_day"]]],
        "instances/ingest_status.sql": [[24, 6, 7], [24 * 400, 1, 30]],
        "instances/instance_header_select.sql": [{"sop_instance_uid": f["sop"]}],
        "instances/instances_by_study.sql": [[f["study"], None, 1000],
                                             [f["study2"], f["received"], 5]],
        "instances/instances_since.sql": [[f["received"], 50], [None, 20]],
        "instances/studies.sql": [[f["first_day"], f["last_day"]], [None, None],
                                  [f["last_day"], f["last_day"]]],
        "instances/study_context.sql": [[f["study"], f["now"]]],
        "instances/study_days.sql": [[f["study"]]],
        "instances/study_detail.sql": [[f["study"], f["policy"]], [f["study2"], None],
                                       ["absent", None]],
        "instances/study_load.sql": [[f["study"]], [f["study2"]]],
        "readings/reading_backfill_candidates.sql": [[f["first_day"], f["last_day"]],
                                                     [None, None]],
        "readings/reading_mismatches.sql": [[f["study"]]],
        "readings/reading_queue_list.sql": [[]],
        "reports/baseline_span.sql": [[f["first_day"], f["last_day"]]],
        "reports/days_in_period.sql": [[f["first_day"], f["last_day"]], [None, None]],
        "reports/stats_day_range.sql": [[]],
        "reports/stats_exam_governing.sql": [[f["first_day"], f["last_day"]]],
        "reports/stats_exam_rows.sql": [[f["first_day"], f["last_day"]]],
        "reports/stats_exam_series.sql": [[f["first_day"], f["last_day"]]],
        "reports/stats_exam_time_at_or_above.sql": [[f["first_day"], f["last_day"], 2.0],
                                                    [f["first_day"], f["last_day"], 3.0]],
        "reports/stats_exam_values.sql": [[f["first_day"], f["last_day"], None],
                                          [f["first_day"], f["last_day"], "room"],
                                          [f["first_day"], f["last_day"], "preset"],
                                          [f["first_day"], f["last_day"], "shift"],
                                          [f["first_day"], f["last_day"], "transducer"]],
        "reports/stats_finding_counts.sql": [[f["first_day"], f["last_day"]]],
        "reports/stats_policy_info.sql": [[f["first_day"], f["last_day"]]],
        "reviews/review_operators.sql": [[f["first_day"], f["last_day"]], [None, None]],
        "reviews/review_worklist.sql": [[f["monday"], 1], [f["later_monday"], 0]],
        "reviews/reviews_csv.sql": [[None, None, None], [f["study"], f["first_day"], None]],
        "reviews/reviews_json.sql": [[None, None, None], [f["study"], f["first_day"], None]],
    }


# Reads documented as unordered (the store sorts their rows): compared as
# sets of rows.
UNORDERED = {"reports/stats_exam_rows.sql", "reports/stats_exam_values.sql",
             "reports/stats_exam_governing.sql", "reports/stats_exam_series.sql",
             "reports/stats_exam_time_at_or_above.sql"}

# Statements run before a write on both engines (file, parameters), so
# that the write has its place (an insert after its delete).
BEFORE = {
    "exams/exam_summary_insert.sql": "exams/exam_summary_delete.sql",
    "exams/exam_time_at_or_above_insert.sql": "exams/exam_time_at_or_above_delete.sql",
}

# Statements that write: parameters, then the table to read back (with an
# ORDER BY that both engines read the same way).
NOW_COLUMNS = "(values differ by the run's clock: compared without them)"


def writes(f):
    review = ["2026-01-05T10:00:00Z"]
    return {
        "reviews/review_insert.sql": (
            [[f["study"], f["finding"], "acceptable", "Seen; \"fine\", thanks", "A. Reviewer",
              "physicist"],
             [f["study2"], None, "referred_to_physics", "", "B. Lead", "lead"]],
            "SELECT study_instance_uid, finding_id, outcome, comment, reviewer, role "
            "FROM reviews ORDER BY id"),
        "findings/finding_insert.sql": (
            [{"study_instance_uid": f["study"], "rule_id": "compare_rule", "severity": "warning",
              "quantity": "tib", "measured_value": 1.35, "unit": None, "limit_value": 1.0,
              "threshold": None, "governing_index": "tib", "instance_uids": '["1.2.3","1.2.4"]',
              "first_seconds": 63900000123, "last_seconds": 63900000999,
              "estimated_seconds": 12.5, "assumptions": None, "source_text": "x",
              "provisional": 1, "policy_version": f["policy"], "exam_type": "ob",
              "room": "R1", "preset": None, "shift": "day", "transducer": None,
              "period": None},
             {"study_instance_uid": None, "rule_id": "compare_device", "severity": "advisory",
              "quantity": None, "measured_value": None, "unit": None, "limit_value": None,
              "threshold": 0.7, "governing_index": None, "instance_uids": "[]",
              "first_seconds": None, "last_seconds": None, "estimated_seconds": None,
              "assumptions": None, "source_text": None, "provisional": 0,
              "policy_version": f["policy"], "exam_type": None, "room": None, "preset": None,
              "shift": None, "transducer": None, "period": f["first_day"]}],
            "SELECT study_instance_uid, rule_id, severity, measured_value, instance_uids, "
            "started_at, ended_at, provisional, period FROM findings "
            "WHERE rule_id LIKE 'compare_%' ORDER BY rule_id"),
        "instances/rejection_insert.sql": (
            [{"received_at": review[0], "calling_ae_title": "SCANNER", "peer_address": "10.0.0.1",
              "sop_class_uid": "", "sop_instance_uid": "", "source_path": "",
              "quarantine_path": "", "reason": "not ultrasound", "site": "north"}],
            "SELECT received_at, calling_ae_title, reason, site FROM rejections ORDER BY id"),
        "exams/exam_time_at_or_above_refresh_all.sql": (
            [[]],
            "SELECT day, study_instance_uid, threshold, seconds FROM exam_time_at_or_above "
            "ORDER BY day, study_instance_uid, threshold"),
        "exams/exam_summary_policy_refresh.sql": (
            [[]],
            "SELECT day, study_instance_uid, measured_policy, measured_seconds "
            "FROM exam_summaries ORDER BY day, study_instance_uid"),
        # With the day counts the triggers of migration 018 raise.
        "exams/exam_summary_delete.sql": (
            [[f["study"]]],
            "SELECT (SELECT count(*) FROM exam_summaries), day, changes FROM data_days "
            "ORDER BY day"),
        "exams/exam_summary_insert.sql": (
            [[f["study"]], [f["study2"]]],
            "SELECT * FROM exam_summaries WHERE study_instance_uid IN ('%s', '%s') "
            "ORDER BY day, study_instance_uid" % (f["study"], f["study2"])),
        "exams/exam_time_at_or_above_insert.sql": (
            [[f["study"]]],
            "SELECT day, study_instance_uid, threshold, seconds FROM exam_time_at_or_above "
            "WHERE study_instance_uid = '%s' ORDER BY day, threshold" % f["study"]),
        "findings/policy_upsert.sql": (
            [{"version": "compare-1", "name": "Compared", "normalised_text": "[x]",
              "rules_json": '[{"id":"a"}]', "limits_json": "[]",
              "closed_after_idle_minutes": 30.0, "gap_cap_seconds": None},
             {"version": "compare-1", "name": "Compared again", "normalised_text": "[x]",
              "rules_json": "[]", "limits_json": '[{"b":1.5}]',
              "closed_after_idle_minutes": None, "gap_cap_seconds": 120.0}],
            "SELECT version, name, normalised_text, rules_json, limits_json, "
            "closed_after_idle_minutes, gap_cap_seconds FROM policies ORDER BY version"),
        "findings/policy_ensure.sql": (
            [{"version": f["policy"], "name": "x", "normalised_text": "y"},
             {"version": "compare-2", "name": None, "normalised_text": "z"}],
            "SELECT version, name, normalised_text FROM policies ORDER BY version"),
        "snapshots/snapshot_put.sql": (
            [["statistics", "from=a;to=b", "s1", "{\"a\": 1}", 12.5, 1],
             ["statistics", "from=a;to=b", "s2", "{\"a\": 2}", 13.5, 0],
             ["drift", "week=2026-W46", "s1", "{}", 1.0, 0]],
            "SELECT view, request, signature, body, made_ms FROM report_snapshots "
            "ORDER BY view, request"),
        "snapshots/snapshot_asked.sql": (
            [["statistics", "from=a;to=b"]],
            "SELECT count(*) FROM report_snapshots"),
        "snapshots/snapshots_prune.sql": (
            [["9999-01-01T00:00:00.000Z"]],
            "SELECT count(*) FROM report_snapshots"),
        "findings/findings_supersede.sql": (
            [[f["study"], "another-version", None, None],
             [None, "another-version", f["device_rule"], f["device_period"]]],
            "SELECT id, superseded, '' AS day FROM findings "
            "UNION ALL SELECT changes, 0, day FROM data_days ORDER BY 3, 1"),
        "findings/device_evaluation_upsert.sql": (
            [{"rule_id": "r", "policy_version": f["policy"], "period": "2026-11-02",
              "evaluation_hash": "h1"},
             {"rule_id": "r", "policy_version": f["policy"], "period": "2026-11-02",
              "evaluation_hash": "h2"}],
            "SELECT rule_id, policy_version, period, evaluation_hash FROM device_evaluations "
            "ORDER BY rule_id, policy_version, period"),
        "exams/exam_context_upsert.sql": (
            [{"study_instance_uid": f["study"], "room": "R9", "preset": None, "shift": "night",
              "transducer": "L1", "age_group": "adult", "last_received_at": review[0],
              "closed": 1}],
            "SELECT * FROM exam_context ORDER BY study_instance_uid"),
        "devices/screen_profile_insert.sql": (
            [{"profile_key": "k", "version": 1, "manufacturer": "M", "model_name": None,
              "software_versions": "1.0", "rows": 600, "columns": 800, "profile_text": "[p]",
              "report": None, "example_image": b"P5 1 1 255\n\x00"}],
            "SELECT profile_key, version, manufacturer, model_name, software_versions, rows, "
            "columns, profile_text, state, report, example_image FROM screen_profiles "
            "ORDER BY id"),
        "exams/exam_upsert.sql": (
            [row_parameters(f, "exams", f["study"], {"exam_type": "compared", "max_tib": 1.25}),
             row_parameters(f, "exams", f["study"], {"study_instance_uid": "2.25.1",
                                                     "exam_type": None})],
            "SELECT * FROM exams ORDER BY study_instance_uid"),
        "instances/instance_upsert.sql": (
            [row_parameters(f, "instances", f["sop"], {"mi": 0.9, "mi_raw": "0.9"}),
             row_parameters(f, "instances", f["sop"], {"sop_instance_uid": "2.25.2",
                                                       "received_at": "2026-11-09T08:00:00Z",
                                                       "site": "south"})],
            "SELECT sop_instance_uid, study_instance_uid, mi, mi_raw, received_at, "
            "first_received_at, replaced_count, site FROM instances "
            "ORDER BY sop_instance_uid"),
        "exams/exam_timeline_insert.sql": (
            [{"study_instance_uid": f["study"], "position": 900, "sop_instance_uid": f["sop"],
              "start_seconds": 1.5, "interval_seconds": 2.0, "cine_seconds": 0.0,
              "attributed_seconds": 2.0, "capped": 1}],
            "SELECT * FROM exam_timeline ORDER BY study_instance_uid, position"),
        "exams/exam_mode_maximum_insert.sql": (
            [{"study_instance_uid": f["study"], "mode": "compared", "rank": 30,
              "index_name": "tib", "max_value": 0.8}],
            "SELECT * FROM exam_mode_maxima ORDER BY study_instance_uid, mode, index_name"),
        "findings/exam_measurements_upsert.sql": (
            [{"study_instance_uid": f["study"], "policy_version": f["policy"],
              "governing_index": "tib", "max_governing": 1.1, "max_mi": 0.4,
              "cem43_minutes": 0.001, "estimated_seconds": 300.0, "doppler_seconds": 20.0,
              "evaluation_hash": "compared"}],
            "SELECT study_instance_uid, policy_version, governing_index, max_governing, "
            "cem43_minutes, evaluation_hash FROM exam_measurements "
            "ORDER BY study_instance_uid, policy_version"),
        "findings/findings_delete.sql": (
            [[f["study"], f["policy"], None, None],
             [None, f["policy"], f["device_rule"], f["device_period"]]],
            "SELECT id FROM findings ORDER BY id"),
        "readings/index_source_set.sql": (
            [["header"]], "SELECT * FROM index_source_setting"),
        "readings/reading_queue_take.sql": (
            [[f["instance_id"], "/nowhere"]], "SELECT count(*) FROM reading_queue"),
        "devices/screen_profile_retire.sql": (
            [{"profile_key": "scanner-a"}],
            "SELECT profile_key, version, state FROM screen_profiles ORDER BY id"),
        "readings/reading_clear_queue.sql": (
            [[f["instance_id"]]],
            "SELECT count(*) FROM reading_queue"),
        "readings/reading_queue_insert.sql": (
            [{"instance_id": f["instance_id"], "path": "/tmp/x.dcm", "owned": 1, "bytes": 10,
              "queued_at": review[0]}],
            "SELECT instance_id, path, owned, bytes, queued_at FROM reading_queue "
            "ORDER BY instance_id"),
        "readings/reading_state_insert.sql": (
            [{"instance_id": f["instance_id"], "reason": None, "state": "queued",
              "updated_at": review[0]}],
            "SELECT instance_id, state, reason, updated_at FROM screen_readings "
            "ORDER BY instance_id"),
    }


def row_parameters(f, table, key, changes):
    """The named parameters of an upsert taken from a row of table (its
    columns are the parameters' names), with changes."""
    column = "study_instance_uid" if table == "exams" else "sop_instance_uid"
    connection = f["connection"]
    cursor = connection.execute("SELECT * FROM %s WHERE %s = ?" % (table, column), (key,))
    row = cursor.fetchone()
    parameters = {d[0]: v for d, v in zip(cursor.description, row)}
    parameters.update(changes)
    return parameters


# Columns whose values come from the clock ('now'): both engines must
# write a time there, but not the same one.
CLOCK = ("evaluated_at", "first_loaded_at", "last_loaded_at", "reviewed_at", "learned_at",
         "confirmed_at", "retired_at", "updated_at")


def repository_schema():
    """The files the PostgreSQL migration runner applies to a new database
    (store_postgresql_migrate.c): compat.sql, the baseline, then every
    common migration above 012, or its PostgreSQL override."""
    migrations = os.path.join(sqlfiles.SQL, "migrations")
    files = [os.path.join(migrations, "postgresql", "compat.sql"),
             os.path.join(migrations, "postgresql", "012_baseline.sql")]
    for name in sorted(os.listdir(migrations)):
        if name.endswith(".sql") and name[:3].isdigit() and int(name[:3]) > 12:
            override = os.path.join(migrations, "postgresql", name)
            files.append(override if os.path.exists(override)
                         else os.path.join(migrations, name))
    return files


def all_queries():
    names = []
    root = os.path.join(sqlfiles.SQL, "queries")
    for subject in sorted(os.listdir(root)):
        for name in sorted(os.listdir(os.path.join(root, subject))):
            if name.endswith(".sql"):
                names.append("queries/%s/%s" % (subject, name))
    return names


def seed(lite):
    """Rows the simulator's plain import does not make (reviews, readings
    of the screen, a learned screen profile, a mismatch finding), added to
    the SQLite database with the statements that write them before the
    copy, so that the reads of them have something to compare."""
    f = facts(lite)
    run = lambda name, p: sqlfiles.run_sqlite(  # noqa: E731
        lite, sqlfiles.query_text("queries/" + name, "sqlite"), p)
    lite.execute("BEGIN")
    for p in writes(f)["reviews/review_insert.sql"][0]:
        run("reviews/review_insert.sql", p)
    run("devices/screen_profile_insert.sql",
        {"profile_key": "scanner-a", "version": 1, "manufacturer": "Lantern Hill Sonics",
         "model_name": "NW-5", "software_versions": "2.1", "rows": 600, "columns": 800,
         "profile_text": "[profile]", "report": "learned", "example_image": b"P5 1 1 255\n\x00"})
    run("devices/screen_profile_activate.sql",
        {"profile_key": "scanner-a", "version": 1, "confirmed_by": "A. Physicist"})
    captures = lite.execute(
        "SELECT id, sop_instance_uid, mi, tib FROM instances WHERE study_instance_uid = ? "
        "AND object_kind = 'image' ORDER BY id LIMIT 6", (f["study"],)).fetchall()
    states = ["read", "read", "not_read", "read", "read", "queued"]
    for (instance_id, sop, mi, tib), state in zip(captures, states):
        reading = {"instance_id": instance_id, "state": state, "profile_key": "scanner-a",
                   "profile_version": 1, "frames_read": 1 if state == "read" else 0,
                   "updated_at": "2026-11-03T10:00:00.000Z",
                   "reason": "no index drawn" if state == "not_read" else None}
        for index in ("mi", "tis", "tib", "tic", "tis_focus", "tis_surface"):
            for column in ("", "_status", "_text", "_decimals", "_reason"):
                reading[index + column] = None
        if state == "read":
            # one agreeing MI, one beyond the screen's rounding, one
            # index left blank on the frame
            shown = (mi if mi is not None else 0.8) + (0.3 if instance_id % 2 else 0.0)
            reading.update({"mi": round(shown, 1), "mi_status": "read",
                            "mi_text": "%.1f" % shown, "mi_decimals": 1,
                            "tib_status": "not_read",
                            "tib_reason": "nothing is drawn where the index goes"})
        run("readings/reading_result_upsert.sql", reading)
    if captures:
        run("findings/finding_insert.sql",
            {"study_instance_uid": f["study"], "rule_id": "header_screen_mismatch",
             "severity": "advisory", "quantity": "mi", "measured_value": 1.1, "unit": None,
             "limit_value": None, "threshold": None, "governing_index": None,
             "instance_uids": "[%s]" % ",".join('"%s"' % c[1] for c in captures[:2]),
             "first_seconds": None, "last_seconds": None, "estimated_seconds": None,
             "assumptions": None, "source_text": None, "provisional": 0,
             "policy_version": f["policy"], "exam_type": None, "room": None, "preset": None,
             "shift": None, "transducer": None, "period": None})
    lite.execute("COMMIT")


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sqlite", required=True)
    parser.add_argument("--postgresql", required=True, help="libpq connection string")
    parser.add_argument("--schema", action="append", default=[],
                        help="SQL file run before --copy (the baseline, compat.sql)")
    parser.add_argument("--repo-schema", action="store_true",
                        help="with --copy: the schema as the PostgreSQL migration runner makes "
                             "it from this tree (compat.sql, 012_baseline.sql, later "
                             "migrations)")
    parser.add_argument("--copy", action="store_true",
                        help="empty the PostgreSQL database and copy the SQLite rows")
    parser.add_argument("--only", action="append", default=[],
                        help="subject/NAME.sql to run (default: every file)")
    parser.add_argument("--verbose", action="store_true")
    args = parser.parse_args()
    import psycopg2
    import psycopg2.extras
    # JSON as text: parsed by the comparison, the same way for both engines.
    psycopg2.extras.register_default_json(loads=lambda text: text)
    psycopg2.extras.register_default_jsonb(loads=lambda text: text)

    # Writes are rolled back, but need a writable file.
    lite = sqlite3.connect(args.sqlite)
    lite.isolation_level = None
    pg = psycopg2.connect(args.postgresql)
    cursor = pg.cursor()
    if args.copy:
        cursor.execute("DROP SCHEMA IF EXISTS public CASCADE; CREATE SCHEMA public")
        for path in (repository_schema() if args.repo_schema else []) + args.schema:
            with open(path, encoding="utf-8") as f:
                # A common migration sets SQLite's user_version; the
                # PostgreSQL runner leaves that line out, as here.
                cursor.execute("".join(line for line in f
                                       if not line.upper().startswith("PRAGMA USER_VERSION")))
        pg.commit()
        seed(lite)
        counts = sqlfiles.copy_database(lite, pg)
        print("copied %d rows in %d tables" % (sum(counts.values()), len(counts)))
    # As the engine's sessions (store_engine_postgresql.c).
    cursor.execute("SET TimeZone = 'UTC'")
    pg.commit()

    f = facts(lite)
    read_cases = reads(f)
    write_cases = writes(f)
    failures = 0
    counted = {"same": 0, "different": 0, "error": 0, "not run": 0, "untested": 0}
    for query in all_queries():
        name = query[len("queries/"):]
        if args.only and name not in args.only:
            continue
        tag = " (override)" if sqlfiles.has_override(query) else ""
        if name in ENGINE_ONLY:
            counted["not run"] += 1
            print("%-48s not run (engine's own)%s" % (name, tag))
            continue
        lite_sql = sqlfiles.query_text(query, "sqlite")
        pg_sql = sqlfiles.query_text(query, "postgresql")
        if name in read_cases:
            result = compare_reads(lite, pg, lite_sql, pg_sql, read_cases[name], args.verbose,
                                   name in UNORDERED, site_choices(f))
        elif name in write_cases:
            parameters, check = write_cases[name]
            before = None
            if name in BEFORE:
                before = (sqlfiles.query_text("queries/" + BEFORE[name], "sqlite"),
                          sqlfiles.query_text("queries/" + BEFORE[name], "postgresql"))
            result = compare_writes(lite, pg, lite_sql, pg_sql, parameters, check, before,
                                    site_choices(f))
        else:
            result = prepare_only(pg, pg_sql)
        kind = result.split()[0].rstrip(":")
        counted[{"same": "same", "DIFFERENT": "different", "ERROR": "error",
                 "prepared": "untested"}[kind]] += 1
        if kind in ("DIFFERENT", "ERROR"):
            failures += 1
        print("%-48s %s%s" % (name, result, tag))
    # An override whose common file has moved to another subject would be
    # left unused: each must sit beside the file it replaces.
    root = os.path.join(sqlfiles.SQL, "queries")
    for subject in sorted(os.listdir(root)):
        folder = os.path.join(root, subject, "postgresql")
        for name in sorted(os.listdir(folder)) if os.path.isdir(folder) else []:
            if "%s/postgresql/%s" % (subject, name) in POSTGRESQL_ONLY:
                counted["not run"] += 1
                print("%-48s not run (PostgreSQL's own)" % ("%s/postgresql/%s" % (subject, name)))
                continue
            if not os.path.exists(os.path.join(root, subject, name)):
                failures += 1
                counted["error"] += 1
                print("%-48s ERROR: override of no file: queries/%s/%s does not exist"
                      % ("%s/postgresql/%s" % (subject, name), subject, name))
    print("; ".join("%s %d" % item for item in counted.items()))
    return 1 if failures else 0


def site_choices(f):
    """The sites a statement with site parameters is run for: every site
    (:site_count 0), the site of the seeded study, that site and every
    other held, and a site that is not held."""
    others = [site for site in f["sites"] if site != f["site"]]
    return ([], [f["site"]], [f["site"]] + others[:15], ["not-a-site"])


def with_sites(sql, cases, choices):
    """The cases of a statement with the site parameters (migration 013),
    each for every choice of sites."""
    if ":site_count" not in sql:
        return cases
    out = []
    for case in cases:
        base = ({str(i + 1): v for i, v in enumerate(case)} if isinstance(case, list)
                else dict(case))
        for sites in choices:
            parameters = dict(base, site_count=len(sites))
            for i in range(16):
                parameters["site_%d" % (i + 1)] = sites[i] if i < len(sites) else None
            out.append(parameters)
    return out


def compare_reads(lite, pg, lite_sql, pg_sql, cases, verbose, unordered=False, sites=([],)):
    cases = with_sites(lite_sql, cases, sites)
    for parameters in cases:
        try:
            expected = sqlfiles.run_sqlite(lite, lite_sql, parameters)
        except sqlite3.Error as error:
            return "ERROR: SQLite: %s" % error
        try:
            answered = sqlfiles.run_postgresql(pg, pg_sql, parameters)
            pg.rollback()
        except Exception as error:  # noqa: BLE001 - report any driver error
            pg.rollback()
            return "ERROR: PostgreSQL: %s" % str(error).strip().split("\n")[0]
        if unordered:
            expected, answered = sorted(expected, key=repr), sorted(answered, key=repr)
        difference = sqlfiles.same_rows(expected, answered)
        if difference:
            if verbose:
                print(expected[:3], "\n", answered[:3])
            return "DIFFERENT: with %r: %s" % (parameters, difference)
    return "same (%d parameter sets)" % len(cases)


def compare_writes(lite, pg, lite_sql, pg_sql, cases, check, before=None, sites=([],)):
    lite.execute("SAVEPOINT compare")
    try:
        for parameters in with_sites(lite_sql, cases, sites):
            if before:
                sqlfiles.run_sqlite(lite, before[0], parameters)
                sqlfiles.run_postgresql(pg, before[1], parameters)
            try:
                sqlfiles.run_sqlite(lite, lite_sql, parameters)
            except sqlite3.Error as error:
                return "ERROR: SQLite: %s" % error
            try:
                sqlfiles.run_postgresql(pg, pg_sql, parameters)
            except Exception as error:  # noqa: BLE001
                pg.rollback()
                return "ERROR: PostgreSQL: %s" % str(error).strip().split("\n")[0]
        expected = lite.execute(check).fetchall()
        cursor = pg.cursor()
        cursor.execute(check)
        answered = cursor.fetchall()
        columns = [d[0] for d in cursor.description]
        keep = [i for i, c in enumerate(columns) if c not in CLOCK]
        expected = [[row[i] for i in keep] for row in expected]
        answered = [[row[i] for i in keep] for row in answered]
        difference = sqlfiles.same_rows(expected, answered)
        if difference:
            return "DIFFERENT: %s" % difference
        return "same (written and read back, %d rows)" % len(expected)
    finally:
        lite.execute("ROLLBACK TO compare")
        lite.execute("RELEASE compare")
        pg.rollback()


def prepare_only(pg, pg_sql):
    text, _ = sqlfiles.postgresql_parameters(pg_sql)
    cursor = pg.cursor()
    try:
        cursor.execute("PREPARE mitilog_check AS %s" % text.strip().rstrip(";"))
        cursor.execute("DEALLOCATE mitilog_check")
        pg.rollback()
        return "prepared (parses and types; not run)"
    except Exception as error:  # noqa: BLE001
        pg.rollback()
        return "ERROR: PostgreSQL: %s" % str(error).strip().split("\n")[0]


if __name__ == "__main__":
    sys.exit(main())
