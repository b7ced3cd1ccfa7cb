-- When the exam worker next has work: the earliest due time of a waiting
-- job (Unix ms; NULL when none) and how many jobs are queued in all.
SELECT min(CASE WHEN taken_by IS NULL THEN due_at END), count(*) FROM exam_jobs;
