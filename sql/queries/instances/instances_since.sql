-- Instances received at or after ?1 (ISO 8601 text compared with
-- received_at, which is UTC; NULL: from the start) as a JSON array in
-- order of receipt, then id; at most ?2 elements.
-- The object is the view instance_documents (migration 004; docs/api.md)
-- with each index's provenance and the pixel reading (migration 007).
SELECT json_group_array(json(document))
FROM (
    SELECT json_set(d.document, '$.indices', json(v.indices),
                    '$.screen_reading', json(v.screen_reading)) AS document
    FROM instance_documents d JOIN instance_provenance v ON v.instance_id = d.id
    WHERE CAST(?1 AS TEXT) IS NULL OR d.received_at >= ?1
    ORDER BY d.received_at, d.id
    LIMIT ?2) AS documents;
