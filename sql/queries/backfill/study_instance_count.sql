-- Instances stored of a study: ?1 Study Instance UID.
SELECT count(*) FROM instances WHERE study_instance_uid = ?1;
