-- The instances of one study as a JSON array, in acquisition order
-- (instances without an acquisition time last), then by id.
-- ?1 study UID, ?2 received_at lower bound or NULL, ?3 limit.
-- The object is the view instance_documents (migration 002; docs/api.md).
SELECT json_group_array(json(document))
FROM (
    SELECT document FROM instance_documents
    WHERE study_instance_uid = ?1
      AND (?2 IS NULL OR received_at >= ?2)
    ORDER BY acquired_at IS NULL, acquired_at, id
    LIMIT ?3);
