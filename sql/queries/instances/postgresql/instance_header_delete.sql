-- PostgreSQL: removes an instance's older header copy when it is re-sent
-- under retention none or full (only its month's partition is searched).
DELETE FROM instance_headers
WHERE instance_id = :instance_id
  AND first_received_at = (SELECT first_received_at FROM instance_keys WHERE id = :instance_id);
