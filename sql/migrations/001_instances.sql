-- 001_instances.sql - one row per received or imported SOP instance with
-- its displayed acoustic output indices, and one row per rejected object.
--
-- Applied by store_open() inside one transaction; the last statement
-- records the schema version (PRAGMA user_version = migration number).
--
-- Later migrations will add studies and findings tables that refer to
-- instances(id). The id of a row never changes: a re-sent SOP instance is
-- an UPSERT (ON CONFLICT ... DO UPDATE), not a delete and insert.
--
-- Each index has three columns: the value (REAL, only when the status is
-- 'ok'), the classification of the DICOM DS text ('ok', 'missing',
-- 'invalid'; never guessed) and the text as sent (NULL when absent).

CREATE TABLE instances (
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
    number_of_frames_status        TEXT NOT NULL
        CHECK (number_of_frames_status IN ('ok', 'missing', 'invalid')),
    frame_time_ms                  REAL,
    frame_time_ms_status           TEXT NOT NULL
        CHECK (frame_time_ms_status IN ('ok', 'missing', 'invalid')),

    is_ultrasound                  INTEGER NOT NULL CHECK (is_ultrasound IN (0, 1)),

    mi                             REAL,
    mi_status                      TEXT NOT NULL CHECK (mi_status IN ('ok', 'missing', 'invalid')),
    mi_raw                         TEXT,
    tis                            REAL,
    tis_status                     TEXT NOT NULL CHECK (tis_status IN ('ok', 'missing', 'invalid')),
    tis_raw                        TEXT,
    tib                            REAL,
    tib_status                     TEXT NOT NULL CHECK (tib_status IN ('ok', 'missing', 'invalid')),
    tib_raw                        TEXT,
    tic                            REAL,
    tic_status                     TEXT NOT NULL CHECK (tic_status IN ('ok', 'missing', 'invalid')),
    tic_raw                        TEXT,
    tis_focus                      REAL,
    tis_focus_status               TEXT NOT NULL CHECK (tis_focus_status IN ('ok', 'missing', 'invalid')),
    tis_focus_raw                  TEXT,
    tis_surface                    REAL,
    tis_surface_status             TEXT NOT NULL CHECK (tis_surface_status IN ('ok', 'missing', 'invalid')),
    tis_surface_raw                TEXT,

    -- A value is present exactly when its text was one well-formed number.
    CHECK ((number_of_frames IS NOT NULL) = (number_of_frames_status = 'ok')),
    CHECK ((frame_time_ms IS NOT NULL) = (frame_time_ms_status = 'ok')),
    CHECK ((mi IS NOT NULL) = (mi_status = 'ok')),
    CHECK ((tis IS NOT NULL) = (tis_status = 'ok')),
    CHECK ((tib IS NOT NULL) = (tib_status = 'ok')),
    CHECK ((tic IS NOT NULL) = (tic_status = 'ok')),
    CHECK ((tis_focus IS NOT NULL) = (tis_focus_status = 'ok')),
    CHECK ((tis_surface IS NOT NULL) = (tis_surface_status = 'ok'))
) STRICT;

CREATE INDEX instances_study ON instances (study_instance_uid, acquired_at);
CREATE INDEX instances_received ON instances (received_at);
CREATE INDEX instances_acquired ON instances (acquired_at);

-- Objects that were not stored as instances (no SOP Instance UID, parse
-- failure, refused by policy). The bytes, when kept, are in quarantine_path.
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
) STRICT;

CREATE INDEX rejections_received ON rejections (received_at);

PRAGMA user_version = 1;
