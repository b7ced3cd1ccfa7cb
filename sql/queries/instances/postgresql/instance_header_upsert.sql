-- PostgreSQL: the header copy of an instance (store_put_instance,
-- retention header), in the month partition of its instance, whose first
-- receipt instance_keys holds.
INSERT INTO instance_headers (instance_id, first_received_at, bytes)
SELECT k.id, k.first_received_at, incoming.bytes
FROM (SELECT :instance_id::bigint AS instance_id, :bytes::bytea AS bytes) AS incoming
JOIN instance_keys AS k ON k.id = incoming.instance_id
ON CONFLICT (instance_id, first_received_at) DO UPDATE SET bytes = excluded.bytes;
