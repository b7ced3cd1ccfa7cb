-- The state of one study of a source: ?1 source, ?2 study UID.
SELECT state, objects_stored, objects_failed, objects_skipped
FROM backfill_studies WHERE source = ?1 AND study_instance_uid = ?2;
