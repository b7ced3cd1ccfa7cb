-- A study's retrieval ended: ?1 source, ?2 study UID, ?3 state (done or
-- failed), ?4 objects stored, ?5 failed, ?6 skipped (already stored, or
-- another station), ?7 message, ?8 now. Counts add up over attempts.
UPDATE backfill_studies
SET state = ?3, objects_stored = objects_stored + ?4, objects_failed = ?5,
    objects_skipped = ?6, message = ?7, finished_at = ?8
WHERE source = ?1 AND study_instance_uid = ?2;
