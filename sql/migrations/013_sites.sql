-- 013_sites.sql - several receivers, one audit (docs/sites.md).
--
-- Each receiver names its site ([receiver] site, default 'main'); every
-- instance and every rejection records the site of the receiver that
-- took it. A re-sent SOP Instance UID stays one row: the last write wins
-- and records its receiver's site (queries/instances/instance_upsert.sql).
-- An exam belongs to the site of its first instance: exam_summaries keeps
-- it, so that statistics, outliers and drift filter and group by site in
-- the same range scan by day. Rows written before this version were taken
-- by the one receiver there was, and read 'main'.
--
-- exam_jobs: the exams whose record is to be rebuilt, marked in the same
-- transaction as the instance that makes them stale (so a kill -9 after
-- the acknowledgement loses no rebuild) and taken by one receiver's exam
-- worker at a time (queries/exams/exam_jobs_take.sql; on PostgreSQL with
-- FOR UPDATE SKIP LOCKED), so that the record of a study is rebuilt once
-- per burst however many receivers write to the database. Times are Unix
-- milliseconds. generation counts the marks: a job marked again while it
-- is being rebuilt keeps its row and is rebuilt once more after.
--
-- Written in the SQL that SQLite and PostgreSQL both accept.

ALTER TABLE instances ADD COLUMN site TEXT NOT NULL DEFAULT 'main';
ALTER TABLE rejections ADD COLUMN site TEXT NOT NULL DEFAULT 'main';
ALTER TABLE exam_summaries ADD COLUMN site TEXT NOT NULL DEFAULT 'main';

CREATE INDEX instances_site ON instances (site, received_at);
CREATE INDEX rejections_site ON rejections (site, received_at);
CREATE INDEX exam_summaries_site_day ON exam_summaries (site, day);

CREATE TABLE exam_jobs (
    study_instance_uid  TEXT PRIMARY KEY,
    first_marked_at     BIGINT NOT NULL,  -- first mark of the burst
    due_at              BIGINT NOT NULL,  -- last mark + quiet period, at most first + longest wait
    generation          BIGINT NOT NULL DEFAULT 1,
    taken_by            TEXT,             -- the receiver rebuilding it; NULL: waiting
    taken_at            BIGINT
);
CREATE INDEX exam_jobs_due ON exam_jobs (due_at);

PRAGMA user_version = 13;
