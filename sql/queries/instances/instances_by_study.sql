-- The instances of one study as a JSON array, in acquisition order
-- (instances without an acquisition time last), then by id.
-- ?1 study UID, ?2 received_at lower bound or NULL, ?3 limit.
-- The object is the view instance_documents (migration 004; docs/api.md)
-- with each index's provenance and the pixel reading (migration 007),
-- and the site of the receiver that took it (migration 013); only those
-- of the sites asked for (:site_count, :site_1 ... :site_16; 0: every
-- site).
WITH asked AS (
    -- ?1 to ?3 first: a named parameter takes the number after the
    -- highest one seen before it in the text.
    SELECT CAST(?1 AS TEXT) AS study, CAST(?2 AS TEXT) AS since, CAST(?3 AS INTEGER) AS row_limit
)
SELECT json_group_array(json(document))
FROM (
    SELECT json_set(d.document, '$.indices', json(v.indices),
                    '$.screen_reading', json(v.screen_reading), '$.site', i.site) AS document
    FROM instance_documents d JOIN instance_provenance v ON v.instance_id = d.id
    JOIN instances i ON i.id = d.id
    WHERE d.study_instance_uid = (SELECT study FROM asked)
      AND ((SELECT since FROM asked) IS NULL OR d.received_at >= (SELECT since FROM asked))
      AND (:site_count = 0 OR i.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7,
          :site_8, :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
    ORDER BY d.acquired_at IS NULL, d.acquired_at, d.id
    LIMIT (SELECT row_limit FROM asked)) AS documents;
