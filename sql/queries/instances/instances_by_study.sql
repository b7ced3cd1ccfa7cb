-- The instances of one study as a JSON array, in acquisition order
-- (instances without an acquisition time last), then by id.
-- ?1 study UID, ?2 received_at lower bound or NULL, ?3 limit.
-- The object is the view instance_documents (migration 004; docs/api.md)
-- with each index's provenance and the pixel reading (migration 007).
SELECT json_group_array(json(document))
FROM (
    SELECT json_set(d.document, '$.indices', json(v.indices),
                    '$.screen_reading', json(v.screen_reading)) AS document
    FROM instance_documents d JOIN instance_provenance v ON v.instance_id = d.id
    WHERE d.study_instance_uid = ?1
      AND (CAST(?2 AS TEXT) IS NULL OR d.received_at >= ?2)
    ORDER BY d.acquired_at IS NULL, d.acquired_at, d.id
    LIMIT ?3) AS documents;
