-- A study's retrieval begins: ?1 source, ?2 study UID, ?3 now.
UPDATE backfill_studies
SET state = 'retrieving', attempts = attempts + 1, started_at = ?3, finished_at = NULL,
    message = ''
WHERE source = ?1 AND study_instance_uid = ?2;
