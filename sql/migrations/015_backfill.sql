-- 015_backfill.sql - what `mitilog backfill` found on a PACS and fetched
-- from it, so that a run that is stopped (or killed) resumes where it
-- was and a run repeated later skips what is done (docs/backfill.md).
--
-- backfill_studies: one row per study of a source (the PACS as
-- AE@HOST:PORT) found by C-FIND; state found -> retrieving -> done, or
-- failed (retried by the next run). Counts are of C-STORE
-- sub-operations of this study: objects stored, objects the PACS could
-- not send or mitilog could not store, objects found already stored
-- (not fetched again). Times are ISO 8601 UTC.
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

CREATE INDEX backfill_studies_state ON backfill_studies (source, state);

-- backfill_runs: one row per run of the command, updated as it goes, for
-- the ingest status page (the run is another process than the daemon).
-- state: running, waiting (outside its time window), finished, failed,
-- interrupted.
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

PRAGMA user_version = 15;
