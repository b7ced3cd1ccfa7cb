-- 002_exam_context.sql - what the audit needs besides the six indices:
-- the object kind, imaging modes (queryable, one row per mode and source),
-- transducer, exam context classified by the site's rules (each value with
-- its provenance), structured-report values, and the exam (study) record
-- with its timeline.
--
-- Provenance columns (*_source) hold the names listed in
-- docs/extraction.md ("study_description", "station_name_map", ...);
-- NULL when the value is absent.

ALTER TABLE instances ADD COLUMN object_kind TEXT NOT NULL DEFAULT 'other'
    CHECK (object_kind IN ('other', 'image', 'multiframe', 'volume', 'sr'));
ALTER TABLE instances ADD COLUMN has_acoustic_record INTEGER NOT NULL DEFAULT 0
    CHECK (has_acoustic_record IN (0, 1));
ALTER TABLE instances ADD COLUMN specific_character_set TEXT;
ALTER TABLE instances ADD COLUMN image_type TEXT;
ALTER TABLE instances ADD COLUMN series_description TEXT;
ALTER TABLE instances ADD COLUMN body_part_examined TEXT;
ALTER TABLE instances ADD COLUMN performed_procedure_step_description TEXT;
ALTER TABLE instances ADD COLUMN procedure_codes TEXT;
-- Bit set of modes (bit n = mode of rank n in instance_modes); the union
-- of all sources. image_type_bitmap: Image Type value 4 as sent, when it
-- was four hex digits; image_type_bitmap_status 'ok', 'missing', 'invalid'.
ALTER TABLE instances ADD COLUMN modes INTEGER NOT NULL DEFAULT 0;
ALTER TABLE instances ADD COLUMN image_type_bitmap INTEGER;
ALTER TABLE instances ADD COLUMN image_type_bitmap_status TEXT NOT NULL DEFAULT 'missing'
    CHECK (image_type_bitmap_status IN ('ok', 'missing', 'invalid'));
ALTER TABLE instances ADD COLUMN modes_conflict INTEGER NOT NULL DEFAULT 0
    CHECK (modes_conflict IN (0, 1));
ALTER TABLE instances ADD COLUMN transducer_data TEXT;
ALTER TABLE instances ADD COLUMN transducer_source TEXT;
ALTER TABLE instances ADD COLUMN transducer_type TEXT;
ALTER TABLE instances ADD COLUMN frequency_khz INTEGER;
ALTER TABLE instances ADD COLUMN frequency_source TEXT;
ALTER TABLE instances ADD COLUMN cine_seconds REAL;
ALTER TABLE instances ADD COLUMN exam_type TEXT;
ALTER TABLE instances ADD COLUMN exam_type_label TEXT;
ALTER TABLE instances ADD COLUMN exam_type_source TEXT;
ALTER TABLE instances ADD COLUMN governing_index TEXT
    CHECK (governing_index IS NULL OR governing_index IN ('tis', 'tib', 'tic'));
ALTER TABLE instances ADD COLUMN governing_index_source TEXT;
ALTER TABLE instances ADD COLUMN gestational_age_weeks REAL;
ALTER TABLE instances ADD COLUMN gestational_age_source TEXT;
ALTER TABLE instances ADD COLUMN preset TEXT;
ALTER TABLE instances ADD COLUMN preset_source TEXT;
ALTER TABLE instances ADD COLUMN room TEXT;
ALTER TABLE instances ADD COLUMN room_source TEXT;
ALTER TABLE instances ADD COLUMN shift TEXT;
ALTER TABLE instances ADD COLUMN shift_source TEXT;
ALTER TABLE instances ADD COLUMN age_group TEXT
    CHECK (age_group IS NULL OR age_group IN ('neonate', 'child', 'adult'));
ALTER TABLE instances ADD COLUMN age_group_source TEXT;
ALTER TABLE instances ADD COLUMN operator_name TEXT;   -- only when [extraction] record_operator
ALTER TABLE instances ADD COLUMN operator_source TEXT;
-- Comma-separated names of fields longer than their VR allows (stored whole).
ALTER TABLE instances ADD COLUMN overlong_fields TEXT;
ALTER TABLE instances ADD COLUMN text_replaced INTEGER NOT NULL DEFAULT 0
    CHECK (text_replaced IN (0, 1));

CREATE INDEX instances_exam_type ON instances (exam_type);

-- One row per mode per source: 'image_type' (value 4 bitmap),
-- 'region_data_type' (ultrasound regions), 'sr_container' (SR code table).
-- Conflicting sources are kept side by side. rank orders the modes as in
-- PS3.3 C.8.5.6.1.1.
CREATE TABLE instance_modes (
    instance_id  INTEGER NOT NULL REFERENCES instances (id) ON DELETE CASCADE,
    mode         TEXT NOT NULL,
    rank         INTEGER NOT NULL,
    source       TEXT NOT NULL
        CHECK (source IN ('image_type', 'region_data_type', 'sr_container')),
    PRIMARY KEY (instance_id, mode, source)
) STRICT;

CREATE INDEX instance_modes_mode ON instance_modes (mode);

-- Values an SR carries, mapped by the site's [sr_codes] table. value is
-- the DS as a number (NULL when not one); normalised is in the
-- quantity's unit (seconds, weeks; indices as is), NULL when the unit was
-- missing or not understood. Provenance: the object and the item's
-- position in the content tree, with its concept.
CREATE TABLE sr_values (
    id                  INTEGER PRIMARY KEY,
    instance_id         INTEGER NOT NULL REFERENCES instances (id) ON DELETE CASCADE,
    study_instance_uid  TEXT,
    quantity            TEXT NOT NULL
        CHECK (quantity IN ('mi', 'tis', 'tib', 'tic', 'scan_time', 'gestational_age')),
    value               REAL,
    raw_value           TEXT,
    unit                TEXT,
    normalised          REAL,
    concept             TEXT NOT NULL,   -- SCHEME:CODE
    concept_meaning     TEXT,
    item_position       TEXT NOT NULL,   -- "1.2.3"
    mode                TEXT             -- enclosing mode container, or NULL
) STRICT;

CREATE INDEX sr_values_instance ON sr_values (instance_id);
CREATE INDEX sr_values_study ON sr_values (study_instance_uid, quantity);

-- One row per study, rebuilt whenever one of its instances arrives.
CREATE TABLE exams (
    study_instance_uid       TEXT PRIMARY KEY,
    exam_type                TEXT,            -- NULL: unclassified
    exam_type_label          TEXT,
    exam_type_source         TEXT NOT NULL,
    governing_index          TEXT NOT NULL CHECK (governing_index IN ('tis', 'tib', 'tic')),
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
) STRICT;

CREATE INDEX exams_type ON exams (exam_type, first_acquired_at);

-- Maxima of each index per mode (an instance counts for every mode it has).
CREATE TABLE exam_mode_maxima (
    study_instance_uid  TEXT NOT NULL REFERENCES exams (study_instance_uid) ON DELETE CASCADE,
    mode                TEXT NOT NULL,
    rank                INTEGER NOT NULL,
    index_name          TEXT NOT NULL,
    max_value           REAL NOT NULL,
    PRIMARY KEY (study_instance_uid, mode, index_name)
) STRICT;

-- The exam timeline: one row per timed capture, in time order.
CREATE TABLE exam_timeline (
    study_instance_uid  TEXT NOT NULL REFERENCES exams (study_instance_uid) ON DELETE CASCADE,
    position            INTEGER NOT NULL,
    sop_instance_uid    TEXT NOT NULL,
    start_seconds       REAL NOT NULL,
    interval_seconds    REAL NOT NULL,
    cine_seconds        REAL NOT NULL,
    attributed_seconds  REAL NOT NULL,
    capped              INTEGER NOT NULL CHECK (capped IN (0, 1)),
    PRIMARY KEY (study_instance_uid, position)
) STRICT;

-- The API's instance object (docs/api.md), one place for every query that
-- serves instances. A later change to the object is a new migration that
-- drops and recreates the view.
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
                 (SELECT DISTINCT mode, rank FROM instance_modes m
                  WHERE m.instance_id = i.id ORDER BY rank)),
    'mode_sources', (SELECT json_group_object(source, json(modes)) FROM
                 (SELECT source, json_group_array(mode) AS modes FROM
                     (SELECT source, mode FROM instance_modes m
                      WHERE m.instance_id = i.id ORDER BY source, rank)
                  GROUP BY source)),
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
        'modes', (SELECT json_group_array(DISTINCT source) FROM instance_modes m
                  WHERE m.instance_id = i.id),
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
FROM instances i;

PRAGMA user_version = 2;
