-- One threshold of the TI ladder of one evaluation of an exam: the
-- timeline seconds at or above it on the governing index (an estimate).
INSERT INTO exam_measurement_time_at_or_above
    (study_instance_uid, policy_version, threshold, seconds)
VALUES (:study_instance_uid, :policy_version, :threshold, :seconds);
