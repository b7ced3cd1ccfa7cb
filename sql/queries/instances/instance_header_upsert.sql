-- The header copy of an instance (store_put_instance, retention header).
INSERT INTO instance_headers (instance_id, bytes) VALUES (:instance_id, :bytes)
ON CONFLICT (instance_id) DO UPDATE SET bytes = excluded.bytes;
