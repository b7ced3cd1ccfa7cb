-- When the exam worker next has work: the earliest due time of a waiting
-- job (Unix ms; NULL when none), how many jobs are queued in all, and
-- the earliest time a job still taken was taken (NULL when none; one
-- taken long ago by a receiver that died is taken again).
SELECT min(CASE WHEN taken_by IS NULL THEN due_at END), count(*),
       min(CASE WHEN taken_by IS NOT NULL THEN taken_at END)
FROM exam_jobs;
