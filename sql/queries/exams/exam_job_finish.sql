-- A receiver (:owner) has rebuilt the exam of :study_instance_uid as it
-- was at mark :generation: the job is done unless it was marked again
-- meanwhile; then it is handed back (not taken) and rebuilt once more when
-- due, so a burst that goes on during a rebuild is not lost. Two
-- statements: exam_job_release.sql follows, and changes nothing when
-- this one removed the row.
DELETE FROM exam_jobs
WHERE study_instance_uid = :study_instance_uid AND generation = :generation
  AND taken_by = :owner;
