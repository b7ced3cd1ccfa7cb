-- Takes up to :limit exam jobs that are due at :now_ms (Unix ms) for the
-- receiver :owner: waiting ones, and ones another receiver took before
-- :stale_before_ms and never finished (it died). Returns each study and
-- the generation taken (exam_job_finish.sql). On SQLite the one writer
-- transaction makes the take atomic; PostgreSQL's text
-- (postgresql/exam_jobs_take.sql) locks the rows it takes with FOR UPDATE
-- SKIP LOCKED, so that two receivers never take the same job.
UPDATE exam_jobs SET taken_by = :owner, taken_at = :now_ms
WHERE study_instance_uid IN (
    SELECT study_instance_uid FROM exam_jobs
    WHERE due_at <= :now_ms
      AND (taken_by IS NULL OR taken_at < :stale_before_ms)
    ORDER BY due_at
    LIMIT :limit)
RETURNING study_instance_uid, generation;
