-- Marks the exam of study :study_instance_uid for a rebuild (exam_jobs,
-- migration 013): in the transaction that writes one of its instances, so
-- an acknowledged object never leaves its exam unrebuilt, even after a
-- kill -9; or on its own (the closing sweep, a finished pixel reading).
-- Times are Unix milliseconds. A burst of marks keeps one row: the job is
-- due :settle_ms after the latest mark, but no later than :max_wait_ms
-- after the first. generation counts the marks, so that a job marked
-- again while a receiver rebuilds it is rebuilt once more after
-- (exam_job_finish.sql); its first mark then restarts from this one.
INSERT INTO exam_jobs (study_instance_uid, first_marked_at, due_at, generation)
-- (CAST: so that PostgreSQL knows the parameters' type in the sum.)
VALUES (:study_instance_uid, :now_ms, CAST(:now_ms AS BIGINT) + CAST(:settle_ms AS BIGINT), 1)
ON CONFLICT (study_instance_uid) DO UPDATE SET
    first_marked_at = CASE WHEN exam_jobs.taken_by IS NULL THEN exam_jobs.first_marked_at
                           ELSE excluded.first_marked_at END,
    due_at = CASE WHEN exam_jobs.taken_by IS NULL
                       AND exam_jobs.first_marked_at + CAST(:max_wait_ms AS BIGINT) < excluded.due_at
                  THEN exam_jobs.first_marked_at + CAST(:max_wait_ms AS BIGINT)
                  ELSE excluded.due_at END,
    generation = exam_jobs.generation + 1;
