-- The objects waiting to be read, oldest first (read again at start):
-- instance id, SOP Instance UID, Study Instance UID, path, owned, bytes.
SELECT q.instance_id, i.sop_instance_uid, i.study_instance_uid, q.path, q.owned, q.bytes
FROM reading_queue q JOIN instances i ON i.id = q.instance_id
ORDER BY q.queued_at, q.instance_id;
