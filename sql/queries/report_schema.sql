-- report_schema.sql - the scratch (in-memory) tables src/report/ fills with
-- computed values before serialising them with SQLite's JSON functions
-- (report_*_json.sql). Never part of the database file.
CREATE TABLE meta (
    position  INTEGER PRIMARY KEY,
    name      TEXT NOT NULL,
    value     ANY,
    is_bool   INTEGER NOT NULL DEFAULT 0
);
CREATE TABLE baselines (
    position INTEGER PRIMARY KEY, exam_type TEXT, count INTEGER, trailing_count INTEGER,
    thin INTEGER, median REAL, mad REAL, p95 REAL
);
CREATE TABLE groups (
    position INTEGER PRIMARY KEY, key TEXT, exam_count INTEGER, valued_count INTEGER,
    outlier_count INTEGER, outlier_rate REAL, median_governing REAL,
    department_median REAL, median_ratio REAL, median_mi REAL,
    capture_count INTEGER, indexed_count INTEGER, completeness REAL,
    finding_count INTEGER
);
CREATE TABLE group_rules (group_position INTEGER, rule_id TEXT, count INTEGER);
CREATE TABLE group_exams (
    group_position INTEGER, position INTEGER, study_instance_uid TEXT, study_key TEXT,
    day TEXT, first_acquired_at TEXT, exam_type TEXT, exam_type_label TEXT,
    study_description TEXT, room TEXT, preset TEXT, shift TEXT, transducer TEXT,
    governing_index TEXT, max_governing REAL, max_mi REAL, robust_z REAL,
    above_robust_z INTEGER, above_p95 INTEGER, outlier INTEGER, finding_count INTEGER,
    baseline_thin INTEGER, baseline_median REAL, baseline_p95 REAL,
    estimated_seconds REAL
);
CREATE TABLE stat_rows (
    position INTEGER PRIMARY KEY, key TEXT, is_total INTEGER, exam_count INTEGER,
    with_findings_count INTEGER, share_with_findings REAL,
    capture_count INTEGER, indexed_count INTEGER, completeness REAL,
    g_count INTEGER, g_min REAL, g_p05 REAL, g_p25 REAL, g_median REAL, g_p75 REAL,
    g_p95 REAL, g_max REAL,
    mi_count INTEGER, mi_min REAL, mi_p05 REAL, mi_p25 REAL, mi_median REAL, mi_p75 REAL,
    mi_p95 REAL, mi_max REAL,
    est_count INTEGER, est_median REAL, est_p75 REAL, est_p95 REAL
);
CREATE TABLE stat_thresholds (
    row_position INTEGER, threshold REAL, exam_count INTEGER, median_seconds REAL,
    p95_seconds REAL, total_seconds REAL
);
CREATE TABLE drift_series (
    position INTEGER PRIMARY KEY, preset TEXT, room TEXT, exam_type TEXT,
    flagged_count INTEGER, max_abs_z REAL
);
CREATE TABLE drift_points (
    series_position INTEGER, position INTEGER, week TEXT, monday TEXT, count INTEGER,
    median REAL, baseline_count INTEGER, baseline_median REAL, baseline_mad REAL,
    z REAL, flagged INTEGER
);
