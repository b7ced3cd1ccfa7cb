-- 003_findings.sql - what the ALARA policy engine (src/rules) produces.
--
-- A policy is identified by its version: the SHA-256 of its normalised
-- text (rules_policy_version). Every finding names the policy version that
-- produced it. Re-evaluating an exam under the same policy replaces that
-- policy's findings for the exam; evaluating it under a new policy marks
-- the older findings superseded (kept, so a report can say which policy
-- produced what).

CREATE TABLE policies (
    version          TEXT PRIMARY KEY,
    name             TEXT,
    normalised_text  TEXT NOT NULL,
    first_loaded_at  TEXT NOT NULL,
    -- The rules as GET /api/v1/policy serves them: a JSON array of
    -- {id, kind, severity, enabled, source, description, settings{}},
    -- built by SQLite's JSON functions when the policy is registered.
    rules_json       TEXT NOT NULL DEFAULT '[]' CHECK (json_valid(rules_json)),
    closed_after_idle_minutes REAL,
    gap_cap_seconds  REAL,
    last_loaded_at   TEXT
) STRICT;

-- Exam-level context the rules and statistics group by, and the exam's
-- state: open until it has been idle for the policy's closing time.
CREATE TABLE exam_context (
    study_instance_uid  TEXT PRIMARY KEY REFERENCES exams (study_instance_uid) ON DELETE CASCADE,
    room                TEXT,
    preset              TEXT,
    shift               TEXT,
    transducer          TEXT,
    age_group           TEXT,
    last_received_at    TEXT,
    closed              INTEGER NOT NULL DEFAULT 0 CHECK (closed IN (0, 1))
) STRICT;

CREATE TABLE findings (
    id                  INTEGER PRIMARY KEY,
    study_instance_uid  TEXT,       -- NULL for device-level findings
    rule_id             TEXT NOT NULL,
    severity            TEXT NOT NULL CHECK (severity IN ('advisory', 'warning', 'violation')),
    quantity            TEXT,       -- e.g. 'tib', 'mi', 'dwell_seconds', 'cem43'
    measured_value      REAL,
    unit                TEXT,
    limit_value         REAL,
    threshold           REAL,       -- dwell rows: the TI threshold
    governing_index     TEXT,
    instance_uids       TEXT NOT NULL DEFAULT '[]' CHECK (json_valid(instance_uids)),
    started_at          TEXT,
    ended_at            TEXT,
    estimated_seconds   REAL,
    assumptions         TEXT,
    source_text         TEXT,
    provisional         INTEGER NOT NULL DEFAULT 0 CHECK (provisional IN (0, 1)),
    superseded          INTEGER NOT NULL DEFAULT 0 CHECK (superseded IN (0, 1)),
    policy_version      TEXT NOT NULL REFERENCES policies (version),
    exam_type           TEXT,
    room                TEXT,
    preset              TEXT,
    shift               TEXT,
    transducer          TEXT,
    evaluated_at        TEXT NOT NULL,
    -- Device-level findings (output_not_reported, study NULL): the day
    -- 'YYYY-MM-DD' (first acquisition) or rescore period they cover.
    period              TEXT
) STRICT;

CREATE INDEX findings_device ON findings (rule_id, policy_version, period)
    WHERE study_instance_uid IS NULL;
CREATE INDEX findings_study ON findings (study_instance_uid, superseded);
CREATE INDEX findings_period ON findings (superseded, started_at);

-- Values every evaluation reports, finding or not (thermal dose is
-- reported as a value): one row per exam and policy version.
CREATE TABLE exam_measurements (
    study_instance_uid  TEXT NOT NULL,
    policy_version      TEXT NOT NULL REFERENCES policies (version),
    governing_index     TEXT,
    max_governing       REAL,
    max_mi              REAL,
    cem43_minutes       REAL,
    estimated_seconds   REAL,
    doppler_seconds     REAL,
    seconds_at_or_above TEXT NOT NULL DEFAULT '{}' CHECK (json_valid(seconds_at_or_above)),
    evaluated_at        TEXT NOT NULL,
    -- SHA-256 of what the evaluation produced (findings, provisional flags,
    -- measurements; not evaluated_at): an evaluation that would write the
    -- same is skipped, so rescoring twice leaves the tables byte-identical.
    evaluation_hash     TEXT,
    PRIMARY KEY (study_instance_uid, policy_version)
) STRICT;

-- Device-level evaluations (output_not_reported per period): the same
-- skip-if-unchanged hash as exam_measurements.
CREATE TABLE device_evaluations (
    rule_id          TEXT NOT NULL,
    policy_version   TEXT NOT NULL REFERENCES policies (version),
    period           TEXT NOT NULL,
    evaluation_hash  TEXT NOT NULL,
    evaluated_at     TEXT NOT NULL,
    PRIMARY KEY (rule_id, policy_version, period)
) STRICT;

PRAGMA user_version = 3;
