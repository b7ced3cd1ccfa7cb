-- PostgreSQL: before writing an instance's SR values again: ?1 instance
-- id (only its month's partition is searched).
DELETE FROM sr_values
WHERE instance_id = ?1
  AND first_received_at = (SELECT first_received_at FROM instance_keys WHERE id = ?1);
