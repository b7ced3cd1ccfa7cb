-- The times at or above of one evaluation of an exam, before they are
-- written again (:study_instance_uid, :policy_version).
DELETE FROM exam_measurement_time_at_or_above
WHERE study_instance_uid = :study_instance_uid AND policy_version = :policy_version;
