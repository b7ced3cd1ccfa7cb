-- Hands back every job taken by :owner: a receiver whose process ended
-- (killed while rebuilding) leaves its jobs taken; at start the worker
-- releases those of earlier processes on the same host
-- (ingest_exam.c), and any receiver retakes a job taken long ago.
UPDATE exam_jobs SET taken_by = NULL, taken_at = NULL WHERE taken_by = :owner;
