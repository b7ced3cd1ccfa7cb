-- Instances received at or after ?1 (ISO 8601 text compared with
-- received_at, which is UTC; NULL: from the start) as a JSON array in
-- order of receipt, then id; at most ?2 elements.
-- The object is the view instance_documents (migration 002; docs/api.md).
SELECT json_group_array(json(document))
FROM (
    SELECT document FROM instance_documents
    WHERE ?1 IS NULL OR received_at >= ?1
    ORDER BY received_at, id
    LIMIT ?2);
