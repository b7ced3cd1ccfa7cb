-- Hands the job of :study_instance_uid taken by :owner back to the queue
-- (after exam_job_finish.sql found it marked again, or after a failed
-- rebuild); it is taken again once due.
UPDATE exam_jobs SET taken_by = NULL, taken_at = NULL
WHERE study_instance_uid = :study_instance_uid AND taken_by = :owner;
