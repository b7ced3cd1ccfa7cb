-- The receivers that hold exam jobs taken (exam_jobs_release_owner.sql).
SELECT DISTINCT taken_by FROM exam_jobs WHERE taken_by IS NOT NULL;
