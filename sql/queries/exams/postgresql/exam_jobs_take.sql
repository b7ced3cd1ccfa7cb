-- exam_jobs_take.sql for PostgreSQL: the rows taken are locked with
-- FOR UPDATE SKIP LOCKED, so that receivers taking jobs at the same time
-- each take other rows and none waits for another (the SQLite text, one
-- folder up, relies on the single writer transaction instead).
UPDATE exam_jobs SET taken_by = :owner, taken_at = :now_ms
WHERE study_instance_uid IN (
    SELECT study_instance_uid FROM exam_jobs
    WHERE due_at <= :now_ms
      AND (taken_by IS NULL OR taken_at < :stale_before_ms)
    ORDER BY due_at
    LIMIT :limit
    FOR UPDATE SKIP LOCKED)
RETURNING study_instance_uid, generation;
