-- An object acknowledged but not yet read (migration 007), committed with
-- its instance row.
INSERT INTO reading_queue (instance_id, path, owned, bytes, queued_at)
VALUES (:instance_id, :path, :owned, :bytes, :queued_at);
