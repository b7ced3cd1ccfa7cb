-- Captures that may be read again from a kept copy (mitilog rescore
-- --read-pixels): ultrasound images and cines acquired (or received)
-- between ?1 and ?2 (dates, NULL open), not waiting in the queue:
-- instance id, SOP Instance UID, Study Instance UID, imported path.
SELECT i.id, i.sop_instance_uid, i.study_instance_uid, i.source_path
FROM instances i
WHERE i.is_ultrasound = 1 AND (i.object_kind = 'image' OR i.object_kind = 'multiframe')
  AND (CAST(?1 AS TEXT) IS NULL OR substr(coalesce(i.acquired_at, i.received_at), 1, 10) >= ?1)
  AND (CAST(?2 AS TEXT) IS NULL OR substr(coalesce(i.acquired_at, i.received_at), 1, 10) <= ?2)
  AND NOT EXISTS (SELECT 1 FROM reading_queue q WHERE q.instance_id = i.id)
ORDER BY i.id;
