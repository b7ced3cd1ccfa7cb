-- schema.sql - the database schema that sql/migrations/ produce, as
-- sqlite3's .schema prints it, one statement after another in a fixed
-- order: tables, indexes, views, triggers, each kind by name. Not run by
-- anything: the migrations make the schema; this file shows it whole, and
-- tests/integration/test_schema.py checks that it is what they produce.
-- Written by: MITILOG_BINARY=build/mitilog /usr/bin/python3 tests/integration/test_schema.py --write
CREATE TABLE backfill_runs (
    id                  INTEGER PRIMARY KEY,
    source              TEXT NOT NULL,
    state               TEXT NOT NULL,
    message             TEXT NOT NULL DEFAULT '',
    studies_found       INTEGER NOT NULL DEFAULT 0,
    studies_done        INTEGER NOT NULL DEFAULT 0,
    studies_failed      INTEGER NOT NULL DEFAULT 0,
    objects             INTEGER NOT NULL DEFAULT 0,
    objects_per_minute  REAL,
    seconds_left        INTEGER,        -- NULL: not known yet
    started_at          TEXT NOT NULL,
    updated_at          TEXT NOT NULL,
    finished_at         TEXT
);
CREATE TABLE backfill_studies (
    source              TEXT NOT NULL,
    study_instance_uid  TEXT NOT NULL,
    state               TEXT NOT NULL CHECK (state IN ('found', 'retrieving', 'done', 'failed')),
    study_date          TEXT,            -- YYYYMMDD as the PACS returned it
    accession_number    TEXT,
    study_description   TEXT,
    expected_objects    INTEGER,         -- NULL: the PACS did not say
    objects_stored      INTEGER NOT NULL DEFAULT 0,
    objects_failed      INTEGER NOT NULL DEFAULT 0,
    objects_skipped     INTEGER NOT NULL DEFAULT 0,
    attempts            INTEGER NOT NULL DEFAULT 0,
    message             TEXT NOT NULL DEFAULT '',
    found_at            TEXT NOT NULL,
    started_at          TEXT,
    finished_at         TEXT,
    PRIMARY KEY (source, study_instance_uid)
);
CREATE TABLE data_days (
    day      TEXT PRIMARY KEY,
    changes  INTEGER NOT NULL DEFAULT 0
);
CREATE TABLE device_evaluations (
    rule_id          TEXT NOT NULL,
    policy_version   TEXT NOT NULL REFERENCES policies (version),
    period           TEXT NOT NULL,
    evaluation_hash  TEXT NOT NULL,
    evaluated_at     TEXT NOT NULL,
    PRIMARY KEY (rule_id, policy_version, period)
) STRICT;
CREATE TABLE IF NOT EXISTS "exam_context" (
    study_instance_uid  TEXT PRIMARY KEY REFERENCES exams (study_instance_uid) ON DELETE CASCADE,
    room                TEXT,
    preset              TEXT,
    shift               TEXT,
    transducer          TEXT,
    age_group           TEXT,
    last_received_at    TEXT,
    closed              INTEGER NOT NULL DEFAULT 0 CHECK (closed = 0 OR closed = 1)
) STRICT;
CREATE TABLE exam_jobs (
    study_instance_uid  TEXT PRIMARY KEY,
    first_marked_at     BIGINT NOT NULL,  -- first mark of the burst
    due_at              BIGINT NOT NULL,  -- last mark + quiet period, at most first + longest wait
    generation          BIGINT NOT NULL DEFAULT 1,
    taken_by            TEXT,             -- the receiver rebuilding it; NULL: waiting
    taken_at            BIGINT
);
CREATE TABLE exam_measurement_time_at_or_above (
    study_instance_uid TEXT NOT NULL,
    policy_version     TEXT NOT NULL,
    threshold          REAL NOT NULL,
    seconds            REAL NOT NULL,
    PRIMARY KEY (study_instance_uid, policy_version, threshold),
    FOREIGN KEY (study_instance_uid, policy_version)
        REFERENCES exam_measurements (study_instance_uid, policy_version) ON DELETE CASCADE
) STRICT, WITHOUT ROWID;
CREATE TABLE exam_measurements (
    study_instance_uid  TEXT NOT NULL,
    policy_version      TEXT NOT NULL REFERENCES policies (version),
    governing_index     TEXT,
    max_governing       REAL,
    max_mi              REAL,
    cem43_minutes       REAL,
    estimated_seconds   REAL,
    doppler_seconds     REAL,
    evaluated_at        TEXT NOT NULL,
    -- SHA-256 of what the evaluation produced (findings, provisional flags,
    -- measurements; not evaluated_at): an evaluation that would write the
    -- same is skipped, so rescoring twice leaves the tables byte-identical.
    evaluation_hash     TEXT,
    PRIMARY KEY (study_instance_uid, policy_version)
) STRICT;
CREATE TABLE exam_mode_maxima (
    study_instance_uid  TEXT NOT NULL REFERENCES exams (study_instance_uid) ON DELETE CASCADE,
    mode                TEXT NOT NULL,
    rank                INTEGER NOT NULL,
    index_name          TEXT NOT NULL,
    max_value           REAL NOT NULL,
    PRIMARY KEY (study_instance_uid, mode, index_name)
) STRICT;
CREATE TABLE exam_summaries (
    day                 TEXT NOT NULL,  -- 'YYYY-MM-DD'; '' when unknown
    study_instance_uid  TEXT NOT NULL,
    first_acquired_at   TEXT,
    exam_type           TEXT,
    exam_type_label     TEXT,
    governing_index     TEXT NOT NULL,
    max_governing       REAL,
    max_mi              REAL,
    estimated_seconds   REAL NOT NULL,
    first_key           TEXT,           -- coalesce(acquired_at, received_at)
    first_id            INTEGER,
    first_room          TEXT,
    first_preset        TEXT,
    first_shift         TEXT,
    first_transducer    TEXT,
    study_description   TEXT,
    context_room        TEXT,
    context_preset      TEXT,
    context_shift       TEXT,
    context_transducer  TEXT,
    measured_policy     TEXT,
    measured_seconds    REAL,
    min_received_at     TEXT,
    captures            INTEGER NOT NULL,
    indexed_count       INTEGER NOT NULL,
    finding_count       INTEGER NOT NULL, site TEXT NOT NULL DEFAULT 'main',
    PRIMARY KEY (day, study_instance_uid)
) STRICT, WITHOUT ROWID;
CREATE TABLE exam_time_at_or_above (
    day                TEXT NOT NULL,  -- the exam's day, as in exam_summaries
    study_instance_uid TEXT NOT NULL,
    threshold          REAL NOT NULL,
    seconds            REAL,           -- NULL: computed from the timeline when read
    PRIMARY KEY (day, study_instance_uid, threshold)
) STRICT, WITHOUT ROWID;
CREATE TABLE IF NOT EXISTS "exam_timeline" (
    study_instance_uid  TEXT NOT NULL REFERENCES exams (study_instance_uid) ON DELETE CASCADE,
    position            INTEGER NOT NULL,
    sop_instance_uid    TEXT NOT NULL,
    start_seconds       REAL NOT NULL,
    interval_seconds    REAL NOT NULL,
    cine_seconds        REAL NOT NULL,
    attributed_seconds  REAL NOT NULL,
    capped              INTEGER NOT NULL CHECK (capped = 0 OR capped = 1),
    PRIMARY KEY (study_instance_uid, position)
) STRICT;
CREATE TABLE IF NOT EXISTS "exams" (
    study_instance_uid       TEXT PRIMARY KEY,
    exam_type                TEXT,            -- NULL: unclassified
    exam_type_label          TEXT,
    exam_type_source         TEXT NOT NULL,
    governing_index          TEXT NOT NULL
        CHECK (governing_index = 'tis' OR governing_index = 'tib' OR governing_index = 'tic'),
    governing_index_source   TEXT NOT NULL,
    gestational_age_weeks    REAL,
    gestational_age_source   TEXT,
    first_acquired_at        TEXT,
    last_acquired_at         TEXT,
    instance_count           INTEGER NOT NULL,
    capture_count            INTEGER NOT NULL,
    cine_count               INTEGER NOT NULL,
    sr_count                 INTEGER NOT NULL,
    other_count              INTEGER NOT NULL,
    max_mi REAL, max_tis REAL, max_tib REAL, max_tic REAL,
    max_tis_focus REAL, max_tis_surface REAL,
    -- Timeline summary: an ESTIMATE (ext_timeline.h, docs/extraction.md).
    estimated_seconds        REAL NOT NULL,
    unscaled_seconds         REAL NOT NULL,
    scale                    REAL NOT NULL,
    span_seconds             REAL NOT NULL,
    timed_count              INTEGER NOT NULL,
    untimed_count            INTEGER NOT NULL,
    capped_count             INTEGER NOT NULL,
    gap_cap_seconds          REAL NOT NULL,
    sr_scan_time_seconds     REAL,
    updated_at               TEXT NOT NULL
, exam_group TEXT) STRICT;
CREATE TABLE IF NOT EXISTS "findings" (
    id                  INTEGER PRIMARY KEY,
    study_instance_uid  TEXT,       -- NULL for device-level findings
    rule_id             TEXT NOT NULL,
    severity            TEXT NOT NULL
        CHECK (severity = 'advisory' OR severity = 'warning' OR severity = 'violation'),
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
    provisional         INTEGER NOT NULL DEFAULT 0 CHECK (provisional = 0 OR provisional = 1),
    superseded          INTEGER NOT NULL DEFAULT 0 CHECK (superseded = 0 OR superseded = 1),
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
CREATE TABLE index_source_setting (
    only_row   INTEGER PRIMARY KEY CHECK (only_row = 1),
    preferred  TEXT NOT NULL CHECK (preferred = 'screen' OR preferred = 'header')
) STRICT;
CREATE TABLE instance_headers (
    instance_id  INTEGER PRIMARY KEY REFERENCES instances (id) ON DELETE CASCADE,
    bytes        BLOB NOT NULL    -- Part 10 file: preamble, meta header, data set
) STRICT;
CREATE TABLE IF NOT EXISTS "instances" (
    id                             INTEGER PRIMARY KEY,
    sop_instance_uid               TEXT NOT NULL UNIQUE,
    sop_class_uid                  TEXT NOT NULL,
    study_instance_uid             TEXT,
    series_instance_uid            TEXT,
    modality                       TEXT,
    station_name                   TEXT,
    institutional_department_name  TEXT,
    study_description              TEXT,
    protocol_name                  TEXT,
    transfer_syntax_uid            TEXT,
    calling_ae_title               TEXT,   -- '' for imported files
    source_path                    TEXT,   -- imported file; NULL for network
    acquired_at                    TEXT,   -- ISO 8601 as the modality gave it; NULL: no time
    acquired_at_source             TEXT NOT NULL,  -- which attributes gave acquired_at
    received_at                    TEXT NOT NULL,  -- ISO 8601 UTC, last receipt
    first_received_at              TEXT NOT NULL,  -- ISO 8601 UTC, first receipt
    replaced_count                 INTEGER NOT NULL DEFAULT 0 CHECK (replaced_count >= 0),
    number_of_frames               INTEGER,
    number_of_frames_status        TEXT NOT NULL,
    frame_time_ms                  REAL,
    frame_time_ms_status           TEXT NOT NULL,
    is_ultrasound                  INTEGER NOT NULL CHECK (is_ultrasound = 0 OR is_ultrasound = 1),
    mi                             REAL,
    mi_status                      TEXT NOT NULL,
    mi_raw                         TEXT,
    tis                            REAL,
    tis_status                     TEXT NOT NULL,
    tis_raw                        TEXT,
    tib                            REAL,
    tib_status                     TEXT NOT NULL,
    tib_raw                        TEXT,
    tic                            REAL,
    tic_status                     TEXT NOT NULL,
    tic_raw                        TEXT,
    tis_focus                      REAL,
    tis_focus_status               TEXT NOT NULL,
    tis_focus_raw                  TEXT,
    tis_surface                    REAL,
    tis_surface_status             TEXT NOT NULL,
    tis_surface_raw                TEXT,
    object_kind                    TEXT NOT NULL DEFAULT 'other'
        CHECK (object_kind = 'other' OR object_kind = 'image' OR object_kind = 'multiframe'
               OR object_kind = 'volume' OR object_kind = 'sr'),
    has_acoustic_record            INTEGER NOT NULL DEFAULT 0
        CHECK (has_acoustic_record = 0 OR has_acoustic_record = 1),
    specific_character_set         TEXT,
    image_type                     TEXT,
    series_description             TEXT,
    body_part_examined             TEXT,
    performed_procedure_step_description TEXT,
    procedure_codes                TEXT,
    -- Bit set of modes (bit n = mode of rank n in mode_names): the union
    -- of the three sources below.
    modes                          INTEGER NOT NULL DEFAULT 0,
    -- Image Type value 4 as sent, when it was four hex digits.
    image_type_bitmap              INTEGER,
    image_type_bitmap_status       TEXT NOT NULL DEFAULT 'missing',
    modes_conflict                 INTEGER NOT NULL DEFAULT 0
        CHECK (modes_conflict = 0 OR modes_conflict = 1),
    transducer_data                TEXT,
    transducer_source              TEXT,
    transducer_type                TEXT,
    frequency_khz                  INTEGER,
    frequency_source               TEXT,
    cine_seconds                   REAL,
    exam_type                      TEXT,
    exam_type_label                TEXT,
    exam_type_source               TEXT,
    governing_index                TEXT
        CHECK (governing_index IS NULL OR governing_index = 'tis' OR governing_index = 'tib'
               OR governing_index = 'tic'),
    governing_index_source         TEXT,
    gestational_age_weeks          REAL,
    gestational_age_source         TEXT,
    preset                         TEXT,
    preset_source                  TEXT,
    room                           TEXT,
    room_source                    TEXT,
    shift                          TEXT,
    shift_source                   TEXT,
    age_group                      TEXT
        CHECK (age_group IS NULL OR age_group = 'neonate' OR age_group = 'child'
               OR age_group = 'adult'),
    age_group_source               TEXT,
    operator_name                  TEXT,   -- only when [extraction] record_operator
    operator_source                TEXT,
    overlong_fields                TEXT,   -- names of fields longer than their VR allows
    text_replaced                  INTEGER NOT NULL DEFAULT 0
        CHECK (text_replaced = 0 OR text_replaced = 1),
    modes_image_type               INTEGER NOT NULL DEFAULT 0,  -- Image Type value 4
    modes_regions                  INTEGER NOT NULL DEFAULT 0,  -- Region Data Types
    modes_sr                       INTEGER NOT NULL DEFAULT 0, accession_number TEXT, site TEXT NOT NULL DEFAULT 'main',  -- SR mode containers

    -- A status is one of three words, and a value is present exactly when
    -- its text was one well-formed number.
    CHECK (number_of_frames_status = 'ok' OR number_of_frames_status = 'missing'
           OR number_of_frames_status = 'invalid'),
    CHECK (frame_time_ms_status = 'ok' OR frame_time_ms_status = 'missing'
           OR frame_time_ms_status = 'invalid'),
    CHECK (mi_status = 'ok' OR mi_status = 'missing' OR mi_status = 'invalid'),
    CHECK (tis_status = 'ok' OR tis_status = 'missing' OR tis_status = 'invalid'),
    CHECK (tib_status = 'ok' OR tib_status = 'missing' OR tib_status = 'invalid'),
    CHECK (tic_status = 'ok' OR tic_status = 'missing' OR tic_status = 'invalid'),
    CHECK (tis_focus_status = 'ok' OR tis_focus_status = 'missing'
           OR tis_focus_status = 'invalid'),
    CHECK (tis_surface_status = 'ok' OR tis_surface_status = 'missing'
           OR tis_surface_status = 'invalid'),
    CHECK (image_type_bitmap_status = 'ok' OR image_type_bitmap_status = 'missing'
           OR image_type_bitmap_status = 'invalid'),
    CHECK ((number_of_frames IS NOT NULL) = (number_of_frames_status = 'ok')),
    CHECK ((frame_time_ms IS NOT NULL) = (frame_time_ms_status = 'ok')),
    CHECK ((mi IS NOT NULL) = (mi_status = 'ok')),
    CHECK ((tis IS NOT NULL) = (tis_status = 'ok')),
    CHECK ((tib IS NOT NULL) = (tib_status = 'ok')),
    CHECK ((tic IS NOT NULL) = (tic_status = 'ok')),
    CHECK ((tis_focus IS NOT NULL) = (tis_focus_status = 'ok')),
    CHECK ((tis_surface IS NOT NULL) = (tis_surface_status = 'ok'))
) STRICT;
CREATE TABLE mode_names (
    rank  INTEGER PRIMARY KEY,      -- bit position in the modes columns
    mode  TEXT NOT NULL UNIQUE      -- as src/extract/ext_modes.c names it
) STRICT;
CREATE TABLE notification_outbox (
    id                  INTEGER PRIMARY KEY,
    finding_key         TEXT NOT NULL,
    channel             TEXT NOT NULL CHECK (channel IN ('webhook', 'syslog')),
    study_instance_uid  TEXT,          -- NULL for a device-level finding
    accession_number    TEXT,
    room                TEXT,
    preset              TEXT,
    rule_id             TEXT NOT NULL,
    severity            TEXT NOT NULL,
    quantity            TEXT,
    measured_value      REAL,
    unit                TEXT,
    limit_value         REAL,
    started_at          TEXT,
    period              TEXT,
    created_at          TEXT NOT NULL, -- ISO 8601 UTC
    state               TEXT NOT NULL DEFAULT 'pending'
        CHECK (state IN ('pending', 'delivered', 'failed')),
    attempts            INTEGER NOT NULL DEFAULT 0 CHECK (attempts >= 0),
    next_attempt_at     TEXT NOT NULL, -- ISO 8601 UTC
    last_error          TEXT,
    delivered_at        TEXT,
    UNIQUE (finding_key, channel)
);
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
, limits_json TEXT NOT NULL DEFAULT '[]'
    CHECK (json_valid(limits_json))) STRICT;
CREATE TABLE reading_queue (
    instance_id  INTEGER PRIMARY KEY REFERENCES instances (id) ON DELETE CASCADE,
    path         TEXT NOT NULL,        -- the file to read
    owned        INTEGER NOT NULL CHECK (owned = 0 OR owned = 1),  -- 1: a spool copy,
                                       -- deleted once read
    bytes        INTEGER NOT NULL CHECK (bytes >= 0),
    queued_at    TEXT NOT NULL         -- ISO 8601 UTC
) STRICT;
CREATE TABLE rejections (
    id                INTEGER PRIMARY KEY,
    received_at       TEXT NOT NULL,  -- ISO 8601 UTC
    calling_ae_title  TEXT NOT NULL,  -- '' for imports
    peer_address      TEXT NOT NULL,  -- '' for imports
    sop_class_uid     TEXT NOT NULL,  -- as announced, may be ''
    sop_instance_uid  TEXT NOT NULL,  -- as announced, may be ''
    source_path       TEXT NOT NULL,  -- imported path, or ''
    quarantine_path   TEXT NOT NULL,  -- '' when the bytes were not kept
    reason            TEXT NOT NULL
, site TEXT NOT NULL DEFAULT 'main') STRICT;
CREATE TABLE report_snapshots (
    view        TEXT NOT NULL,
    request     TEXT NOT NULL,
    signature   TEXT NOT NULL,
    body        TEXT NOT NULL,
    made_at     TEXT NOT NULL,   -- ISO 8601 UTC
    made_ms     REAL NOT NULL,   -- how long the document took to make
    asked_at    TEXT NOT NULL,   -- last asked for (to the hour): what the
                                 -- refresher keeps ready, what is forgotten
    PRIMARY KEY (view, request)
);
CREATE TABLE reviews (
    id                  INTEGER PRIMARY KEY,
    study_instance_uid  TEXT,        -- NULL only for a device-level finding
    finding_id          INTEGER,     -- NULL: the whole exam was reviewed
    outcome             TEXT NOT NULL CHECK (outcome IN (
                            'acceptable', 'discussed_with_operator',
                            'referred_to_physics', 'preset_to_change', 'reopened')),
    comment             TEXT NOT NULL DEFAULT '' CHECK (length(comment) <= 2000),
    reviewer            TEXT NOT NULL,
    role                TEXT NOT NULL,
    reviewed_at         TEXT NOT NULL, -- ISO 8601 UTC
    CHECK (study_instance_uid IS NOT NULL OR finding_id IS NOT NULL)
) STRICT;
CREATE TABLE screen_profiles (
    id INTEGER PRIMARY KEY,
    profile_key TEXT NOT NULL,
    version INTEGER NOT NULL,
    manufacturer TEXT,
    model_name TEXT,
    software_versions TEXT,
    rows INTEGER,
    columns INTEGER,
    profile_text TEXT NOT NULL,
    state TEXT NOT NULL DEFAULT 'proposed'
        CHECK (state IN ('proposed', 'active', 'retired')),
    learned_at TEXT NOT NULL,
    report TEXT,
    example_image BLOB,            -- one learning frame as binary PGM (P5)
    confirmed_by TEXT,
    confirmed_at TEXT,
    retired_at TEXT,
    UNIQUE (profile_key, version)
);
CREATE TABLE screen_readings (
    instance_id      INTEGER PRIMARY KEY REFERENCES instances (id) ON DELETE CASCADE,
    state            TEXT NOT NULL
        CHECK (state = 'queued' OR state = 'read' OR state = 'not_read'),
    reason           TEXT,             -- whole-object reason when not read
    profile_key      TEXT,
    profile_version  INTEGER,
    frames_read      INTEGER NOT NULL DEFAULT 0,
    updated_at       TEXT NOT NULL,    -- ISO 8601 UTC
    mi REAL, mi_status TEXT, mi_text TEXT, mi_decimals INTEGER, mi_reason TEXT,
    tis REAL, tis_status TEXT, tis_text TEXT, tis_decimals INTEGER, tis_reason TEXT,
    tib REAL, tib_status TEXT, tib_text TEXT, tib_decimals INTEGER, tib_reason TEXT,
    tic REAL, tic_status TEXT, tic_text TEXT, tic_decimals INTEGER, tic_reason TEXT,
    tis_focus REAL, tis_focus_status TEXT, tis_focus_text TEXT, tis_focus_decimals INTEGER,
    tis_focus_reason TEXT,
    tis_surface REAL, tis_surface_status TEXT, tis_surface_text TEXT,
    tis_surface_decimals INTEGER, tis_surface_reason TEXT,
    CHECK ((mi IS NOT NULL) = (mi_status IS NOT NULL AND mi_status = 'read')),
    CHECK ((tis IS NOT NULL) = (tis_status IS NOT NULL AND tis_status = 'read')),
    CHECK ((tib IS NOT NULL) = (tib_status IS NOT NULL AND tib_status = 'read')),
    CHECK ((tic IS NOT NULL) = (tic_status IS NOT NULL AND tic_status = 'read')),
    CHECK ((tis_focus IS NOT NULL) = (tis_focus_status IS NOT NULL AND tis_focus_status = 'read')),
    CHECK ((tis_surface IS NOT NULL)
           = (tis_surface_status IS NOT NULL AND tis_surface_status = 'read'))
) STRICT;
CREATE TABLE IF NOT EXISTS "sr_values" (
    id                  INTEGER PRIMARY KEY,
    instance_id         INTEGER NOT NULL REFERENCES instances (id) ON DELETE CASCADE,
    study_instance_uid  TEXT,
    quantity            TEXT NOT NULL
        CHECK (quantity = 'mi' OR quantity = 'tis' OR quantity = 'tib' OR quantity = 'tic'
               OR quantity = 'scan_time' OR quantity = 'gestational_age'),
    value               REAL,
    raw_value           TEXT,
    unit                TEXT,
    normalised          REAL,
    concept             TEXT NOT NULL,   -- SCHEME:CODE
    concept_meaning     TEXT,
    item_position       TEXT NOT NULL,   -- "1.2.3"
    mode                TEXT             -- enclosing mode container, or NULL
) STRICT;
CREATE TABLE ti_thresholds (
    threshold REAL PRIMARY KEY CHECK (threshold > 0)
) STRICT, WITHOUT ROWID;
CREATE INDEX backfill_studies_state ON backfill_studies (source, state);
CREATE INDEX exam_jobs_due ON exam_jobs (due_at);
CREATE INDEX exam_summaries_site_day ON exam_summaries (site, day);
CREATE UNIQUE INDEX exam_summaries_study ON exam_summaries (study_instance_uid);
CREATE INDEX exam_summaries_with_findings ON exam_summaries (day) WHERE finding_count > 0;
CREATE INDEX exam_time_at_or_above_study ON exam_time_at_or_above (study_instance_uid);
CREATE INDEX exams_first_acquired ON exams (first_acquired_at);
CREATE INDEX exams_type ON exams (exam_type, first_acquired_at);
CREATE INDEX findings_device ON findings (rule_id, policy_version, period)
    WHERE study_instance_uid IS NULL;
CREATE INDEX findings_period ON findings (superseded, started_at);
CREATE INDEX findings_study ON findings (study_instance_uid, superseded);
CREATE INDEX instances_day ON instances (substr(coalesce(acquired_at, received_at), 1, 10));
CREATE INDEX instances_received ON instances (received_at);
CREATE INDEX instances_site ON instances (site, received_at);
CREATE INDEX instances_study ON instances (study_instance_uid, acquired_at);
CREATE INDEX notification_outbox_due ON notification_outbox (state, next_attempt_at);
CREATE INDEX rejections_received ON rejections (received_at);
CREATE INDEX rejections_site ON rejections (site, received_at);
CREATE INDEX report_snapshots_asked ON report_snapshots (asked_at);
CREATE INDEX reviews_finding ON reviews (finding_id, id) WHERE finding_id IS NOT NULL;
CREATE INDEX reviews_study ON reviews (study_instance_uid, id);
CREATE INDEX reviews_time ON reviews (reviewed_at);
CREATE UNIQUE INDEX screen_profiles_one_active
    ON screen_profiles (profile_key) WHERE state = 'active';
CREATE INDEX screen_readings_state ON screen_readings (state);
CREATE INDEX sr_values_instance_quantity ON sr_values (instance_id, quantity, id);
CREATE INDEX sr_values_study ON sr_values (study_instance_uid, quantity);
CREATE VIEW exam_period_rows AS
SELECT s.day,
       s.study_instance_uid,
       s.first_acquired_at,
       s.exam_type,
       s.exam_type_label,
       s.governing_index,
       s.max_governing,
       s.max_mi,
       coalesce(s.context_room, s.first_room) AS room,
       coalesce(s.context_preset, s.first_preset) AS preset,
       coalesce(s.context_shift, s.first_shift) AS shift,
       coalesce(s.context_transducer, s.first_transducer) AS transducer,
       s.study_description,
       coalesce(CASE WHEN s.measured_policy IS (SELECT version FROM policies
                                                 ORDER BY first_loaded_at DESC, rowid DESC
                                                 LIMIT 1)
                     THEN s.measured_seconds
                     ELSE (SELECT m.estimated_seconds FROM exam_measurements m
                           WHERE m.study_instance_uid = s.study_instance_uid
                             AND m.policy_version = (SELECT version FROM policies
                                                     ORDER BY first_loaded_at DESC,
                                                              rowid DESC LIMIT 1)) END,
                s.estimated_seconds) AS estimated_seconds,
       s.captures,
       s.indexed_count,
       s.finding_count
FROM exam_summaries s
/* exam_period_rows(day,study_instance_uid,first_acquired_at,exam_type,exam_type_label,governing_index,max_governing,max_mi,room,preset,shift,transducer,study_description,estimated_seconds,captures,indexed_count,finding_count) */;
CREATE VIEW instance_documents AS
SELECT i.id, i.study_instance_uid, i.received_at, i.acquired_at,
    json_object(
    'sop_instance_uid', i.sop_instance_uid,
    'study_instance_uid', i.study_instance_uid,
    'series_instance_uid', i.series_instance_uid,
    'sop_class_uid', i.sop_class_uid,
    'object_kind', i.object_kind,
    'has_acoustic_record', json(iif(i.has_acoustic_record, 'true', 'false')),
    'modality', i.modality,
    'station_name', i.station_name,
    'institutional_department_name', i.institutional_department_name,
    'study_description', i.study_description,
    'protocol_name', i.protocol_name,
    'series_description', i.series_description,
    'performed_procedure_step_description', i.performed_procedure_step_description,
    'body_part_examined', i.body_part_examined,
    'procedure_codes', i.procedure_codes,
    'image_type', i.image_type,
    'specific_character_set', i.specific_character_set,
    'acquired_at', i.acquired_at,
    'acquired_at_source', i.acquired_at_source,
    'received_at', i.received_at,
    'number_of_frames', i.number_of_frames,
    'frame_time_ms', i.frame_time_ms,
    'cine_seconds', i.cine_seconds,
    'transfer_syntax_uid', i.transfer_syntax_uid,
    'calling_ae_title', i.calling_ae_title,
    'is_ultrasound', json(iif(i.is_ultrasound, 'true', 'false')),
    'mi', i.mi, 'tis', i.tis, 'tib', i.tib, 'tic', i.tic,
    'tis_focus', i.tis_focus, 'tis_surface', i.tis_surface,
    'index_status', json_object(
        'mi', i.mi_status, 'tis', i.tis_status, 'tib', i.tib_status,
        'tic', i.tic_status, 'tis_focus', i.tis_focus_status,
        'tis_surface', i.tis_surface_status),
    'index_raw', json_object(
        'mi', i.mi_raw, 'tis', i.tis_raw, 'tib', i.tib_raw, 'tic', i.tic_raw,
        'tis_focus', i.tis_focus_raw, 'tis_surface', i.tis_surface_raw),
    'modes', (SELECT json_group_array(mode) FROM
                 (SELECT mode FROM mode_names WHERE (i.modes >> rank) & 1 ORDER BY rank)),
    'mode_sources', (SELECT json_group_object(source, json(modes)) FROM
                 (SELECT s.source, (SELECT json_group_array(mode) FROM
                                       (SELECT mode FROM mode_names
                                        WHERE (s.bits >> rank) & 1 ORDER BY rank)) AS modes
                  FROM (SELECT 'image_type' AS source, i.modes_image_type AS bits
                        UNION ALL SELECT 'region_data_type', i.modes_regions
                        UNION ALL SELECT 'sr_container', i.modes_sr) AS s
                  WHERE s.bits <> 0 ORDER BY s.source)),
    'modes_conflict', json(iif(i.modes_conflict, 'true', 'false')),
    'image_type_bitmap', iif(i.image_type_bitmap IS NULL, NULL,
                             printf('%04X', i.image_type_bitmap)),
    'image_type_bitmap_status', i.image_type_bitmap_status,
    'transducer', i.transducer_data,
    'transducer_type', i.transducer_type,
    'frequency_mhz', i.frequency_khz / 1000.0,
    'exam_type', i.exam_type,
    'exam_type_label', i.exam_type_label,
    'governing_index', i.governing_index,
    'preset', i.preset,
    'room', i.room,
    'shift', i.shift,
    'age_group', i.age_group,
    'gestational_age_weeks', i.gestational_age_weeks,
    'operator_name', i.operator_name,
    'source', json_object(
        'modes', (SELECT json_group_array(source) FROM
                     (SELECT 'image_type' AS source, i.modes_image_type AS bits
                      UNION ALL SELECT 'region_data_type', i.modes_regions
                      UNION ALL SELECT 'sr_container', i.modes_sr)
                  WHERE bits <> 0),
        'transducer', i.transducer_source,
        'transducer_type', iif(i.transducer_type IS NULL, NULL, 'transducer_type'),
        'frequency_mhz', i.frequency_source,
        'exam_type', i.exam_type_source,
        'governing_index', i.governing_index_source,
        'preset', i.preset_source,
        'room', i.room_source,
        'shift', i.shift_source,
        'age_group', i.age_group_source,
        'gestational_age_weeks', i.gestational_age_source,
        'operator_name', i.operator_source,
        'acquired_at', i.acquired_at_source),
    'sr_values', (SELECT json_group_array(json_object(
                      'quantity', quantity, 'value', value, 'raw_value', raw_value,
                      'unit', unit, 'normalised', normalised, 'concept', concept,
                      'concept_meaning', concept_meaning,
                      'item_position', item_position, 'mode', mode))
                  FROM (SELECT * FROM sr_values s WHERE s.instance_id = i.id
                        ORDER BY s.id)),
    'overlong_fields', json(iif(i.overlong_fields IS NULL OR i.overlong_fields = '', '[]',
                            '["' || replace(i.overlong_fields, ',', '","') || '"]')),
    'text_replaced', json(iif(i.text_replaced, 'true', 'false')),
    'replaced_count', i.replaced_count) AS document
FROM instances i
/* instance_documents(id,study_instance_uid,received_at,acquired_at,document) */;
CREATE VIEW instance_modes AS
SELECT i.id AS instance_id, n.mode AS mode, n.rank AS rank, 'image_type' AS source
FROM instances AS i JOIN mode_names AS n ON (i.modes_image_type >> n.rank) & 1
UNION ALL
SELECT i.id, n.mode, n.rank, 'region_data_type'
FROM instances AS i JOIN mode_names AS n ON (i.modes_regions >> n.rank) & 1
UNION ALL
SELECT i.id, n.mode, n.rank, 'sr_container'
FROM instances AS i JOIN mode_names AS n ON (i.modes_sr >> n.rank) & 1
/* instance_modes(instance_id,mode,rank,source) */;
CREATE VIEW instance_provenance AS
SELECT i.id AS instance_id,
    json_object(
        'mi', json_object(
            'value', CASE WHEN (s.mi_status IS NOT NULL AND s.mi_status = 'read' AND (p.preferred = 'screen' OR i.mi_status <> 'ok')) THEN s.mi ELSE i.mi END,
            'used', CASE WHEN (s.mi_status IS NOT NULL AND s.mi_status = 'read' AND (p.preferred = 'screen' OR i.mi_status <> 'ok')) THEN 'screen' WHEN i.mi_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.mi_status = 'ok' AND s.mi_status IS NOT NULL AND s.mi_status = 'read') THEN 'both'
                           WHEN i.mi_status = 'ok' THEN 'header'
                           WHEN s.mi_status IS NOT NULL AND s.mi_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.mi_status = 'ok' AND s.mi_status IS NOT NULL AND s.mi_status = 'read')
                          THEN json(iif(abs(i.mi - s.mi) <= CASE s.mi_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.mi, 'status', i.mi_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.mi, 'status', s.mi_status, 'text', s.mi_text,
                'decimals', s.mi_decimals, 'reason', s.mi_reason))),
        'tis', json_object(
            'value', CASE WHEN (s.tis_status IS NOT NULL AND s.tis_status = 'read' AND (p.preferred = 'screen' OR i.tis_status <> 'ok')) THEN s.tis ELSE i.tis END,
            'used', CASE WHEN (s.tis_status IS NOT NULL AND s.tis_status = 'read' AND (p.preferred = 'screen' OR i.tis_status <> 'ok')) THEN 'screen' WHEN i.tis_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tis_status = 'ok' AND s.tis_status IS NOT NULL AND s.tis_status = 'read') THEN 'both'
                           WHEN i.tis_status = 'ok' THEN 'header'
                           WHEN s.tis_status IS NOT NULL AND s.tis_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tis_status = 'ok' AND s.tis_status IS NOT NULL AND s.tis_status = 'read')
                          THEN json(iif(abs(i.tis - s.tis) <= CASE s.tis_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tis, 'status', i.tis_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tis, 'status', s.tis_status, 'text', s.tis_text,
                'decimals', s.tis_decimals, 'reason', s.tis_reason))),
        'tib', json_object(
            'value', CASE WHEN (s.tib_status IS NOT NULL AND s.tib_status = 'read' AND (p.preferred = 'screen' OR i.tib_status <> 'ok')) THEN s.tib ELSE i.tib END,
            'used', CASE WHEN (s.tib_status IS NOT NULL AND s.tib_status = 'read' AND (p.preferred = 'screen' OR i.tib_status <> 'ok')) THEN 'screen' WHEN i.tib_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tib_status = 'ok' AND s.tib_status IS NOT NULL AND s.tib_status = 'read') THEN 'both'
                           WHEN i.tib_status = 'ok' THEN 'header'
                           WHEN s.tib_status IS NOT NULL AND s.tib_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tib_status = 'ok' AND s.tib_status IS NOT NULL AND s.tib_status = 'read')
                          THEN json(iif(abs(i.tib - s.tib) <= CASE s.tib_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tib, 'status', i.tib_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tib, 'status', s.tib_status, 'text', s.tib_text,
                'decimals', s.tib_decimals, 'reason', s.tib_reason))),
        'tic', json_object(
            'value', CASE WHEN (s.tic_status IS NOT NULL AND s.tic_status = 'read' AND (p.preferred = 'screen' OR i.tic_status <> 'ok')) THEN s.tic ELSE i.tic END,
            'used', CASE WHEN (s.tic_status IS NOT NULL AND s.tic_status = 'read' AND (p.preferred = 'screen' OR i.tic_status <> 'ok')) THEN 'screen' WHEN i.tic_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tic_status = 'ok' AND s.tic_status IS NOT NULL AND s.tic_status = 'read') THEN 'both'
                           WHEN i.tic_status = 'ok' THEN 'header'
                           WHEN s.tic_status IS NOT NULL AND s.tic_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tic_status = 'ok' AND s.tic_status IS NOT NULL AND s.tic_status = 'read')
                          THEN json(iif(abs(i.tic - s.tic) <= CASE s.tic_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tic, 'status', i.tic_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tic, 'status', s.tic_status, 'text', s.tic_text,
                'decimals', s.tic_decimals, 'reason', s.tic_reason))),
        'tis_focus', json_object(
            'value', CASE WHEN (s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read' AND (p.preferred = 'screen' OR i.tis_focus_status <> 'ok')) THEN s.tis_focus ELSE i.tis_focus END,
            'used', CASE WHEN (s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read' AND (p.preferred = 'screen' OR i.tis_focus_status <> 'ok')) THEN 'screen' WHEN i.tis_focus_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tis_focus_status = 'ok' AND s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read') THEN 'both'
                           WHEN i.tis_focus_status = 'ok' THEN 'header'
                           WHEN s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tis_focus_status = 'ok' AND s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read')
                          THEN json(iif(abs(i.tis_focus - s.tis_focus) <= CASE s.tis_focus_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tis_focus, 'status', i.tis_focus_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tis_focus, 'status', s.tis_focus_status, 'text', s.tis_focus_text,
                'decimals', s.tis_focus_decimals, 'reason', s.tis_focus_reason))),
        'tis_surface', json_object(
            'value', CASE WHEN (s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read' AND (p.preferred = 'screen' OR i.tis_surface_status <> 'ok')) THEN s.tis_surface ELSE i.tis_surface END,
            'used', CASE WHEN (s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read' AND (p.preferred = 'screen' OR i.tis_surface_status <> 'ok')) THEN 'screen' WHEN i.tis_surface_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tis_surface_status = 'ok' AND s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read') THEN 'both'
                           WHEN i.tis_surface_status = 'ok' THEN 'header'
                           WHEN s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tis_surface_status = 'ok' AND s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read')
                          THEN json(iif(abs(i.tis_surface - s.tis_surface) <= CASE s.tis_surface_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tis_surface, 'status', i.tis_surface_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tis_surface, 'status', s.tis_surface_status, 'text', s.tis_surface_text,
                'decimals', s.tis_surface_decimals, 'reason', s.tis_surface_reason)))
    ) AS indices,
    iif(s.instance_id IS NULL, NULL, json_object(
        'state', s.state, 'reason', s.reason, 'profile_key', s.profile_key,
        'profile_version', s.profile_version, 'frames_read', s.frames_read,
        'updated_at', s.updated_at)) AS screen_reading
FROM instances i
JOIN index_source_setting p ON p.only_row = 1
LEFT JOIN screen_readings s ON s.instance_id = i.id
/* instance_provenance(instance_id,indices,screen_reading) */;
CREATE TRIGGER data_days_finding_delete AFTER DELETE ON findings
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid
    UNION SELECT substr(OLD.started_at, 1, 10), 1 WHERE OLD.started_at IS NOT NULL
    UNION SELECT substr(OLD.period, 1, 10), 1 WHERE OLD.period IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_finding_insert AFTER INSERT ON findings
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid
    UNION SELECT substr(NEW.started_at, 1, 10), 1 WHERE NEW.started_at IS NOT NULL
    UNION SELECT substr(NEW.period, 1, 10), 1 WHERE NEW.period IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_finding_update AFTER UPDATE ON findings
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid
    UNION SELECT substr(OLD.started_at, 1, 10), 1 WHERE OLD.started_at IS NOT NULL
    UNION SELECT substr(OLD.period, 1, 10), 1 WHERE OLD.period IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid
    UNION SELECT substr(NEW.started_at, 1, 10), 1 WHERE NEW.started_at IS NOT NULL
    UNION SELECT substr(NEW.period, 1, 10), 1 WHERE NEW.period IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_measurement_delete AFTER DELETE ON exam_measurements
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_measurement_insert AFTER INSERT ON exam_measurements
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_measurement_update AFTER UPDATE ON exam_measurements
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_summary_delete AFTER DELETE ON exam_summaries
BEGIN
    INSERT INTO data_days (day, changes) VALUES (OLD.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT DISTINCT substr(started_at, 1, 10), 1 FROM findings
    WHERE study_instance_uid = OLD.study_instance_uid AND started_at IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_summary_insert AFTER INSERT ON exam_summaries
BEGIN
    INSERT INTO data_days (day, changes) VALUES (NEW.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT DISTINCT substr(started_at, 1, 10), 1 FROM findings
    WHERE study_instance_uid = NEW.study_instance_uid AND started_at IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_summary_update AFTER UPDATE ON exam_summaries
BEGIN
    INSERT INTO data_days (day, changes) VALUES (OLD.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes) VALUES (NEW.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT DISTINCT substr(started_at, 1, 10), 1 FROM findings
    WHERE study_instance_uid = OLD.study_instance_uid AND started_at IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT DISTINCT substr(started_at, 1, 10), 1 FROM findings
    WHERE study_instance_uid = NEW.study_instance_uid AND started_at IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_time_delete AFTER DELETE ON exam_time_at_or_above
BEGIN
    INSERT INTO data_days (day, changes) VALUES (OLD.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_time_insert AFTER INSERT ON exam_time_at_or_above
BEGIN
    INSERT INTO data_days (day, changes) VALUES (NEW.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_time_update AFTER UPDATE ON exam_time_at_or_above
BEGIN
    INSERT INTO data_days (day, changes) VALUES (OLD.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes) VALUES (NEW.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER exam_summaries_exam_delete AFTER DELETE ON exams
BEGIN
    DELETE FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid;
END;
CREATE TRIGGER exam_time_at_or_above_exam_delete AFTER DELETE ON exams
BEGIN
    DELETE FROM exam_time_at_or_above WHERE study_instance_uid = OLD.study_instance_uid;
END;
CREATE TRIGGER reviews_no_delete BEFORE DELETE ON reviews
BEGIN
    SELECT raise(ABORT, 'reviews are append-only: add a new review instead');
END;
CREATE TRIGGER reviews_no_update BEFORE UPDATE ON reviews
BEGIN
    SELECT raise(ABORT, 'reviews are append-only: add a new review instead');
END;
