-- The statistics document (docs/api.md, GET /api/v1/stats) from the
-- scratch tables: meta keys, then one object per row (the total last).
WITH rows AS (
    SELECT r.*, (SELECT json_group_array(json_object(
        'threshold', t.threshold, 'exam_count', t.exam_count,
        'median_seconds', t.median_seconds, 'p95_seconds', t.p95_seconds,
        'total_seconds', t.total_seconds))
        FROM (SELECT * FROM stat_thresholds t WHERE t.row_position = r.position
              ORDER BY t.threshold) AS t) AS thresholds
    FROM stat_rows r
),
documents AS (
    SELECT position, is_total, json_object(
        'key', key, 'exam_count', exam_count,
        'exams_with_findings', with_findings_count,
        'share_with_findings', share_with_findings,
        'captures', capture_count, 'captures_with_indices', indexed_count,
        'data_completeness', completeness,
        'governing', json_object('count', g_count, 'min', g_min, 'p05', g_p05,
            'p25', g_p25, 'median', g_median, 'p75', g_p75, 'p95', g_p95, 'max', g_max),
        'mi', json_object('count', mi_count, 'min', mi_min, 'p05', mi_p05,
            'p25', mi_p25, 'median', mi_median, 'p75', mi_p75, 'p95', mi_p95, 'max', mi_max),
        'estimated_seconds', json_object('count', est_count, 'median', est_median,
            'p75', est_p75, 'p95', est_p95),
        'time_at_or_above', json(thresholds)) AS document
    FROM rows
)
SELECT json_insert(
    (SELECT json_group_object(name, iif(is_bool, json(iif(value, 'true', 'false')), value))
     FROM (SELECT * FROM meta ORDER BY position)),
    '$.rows', json((SELECT json_group_array(json(document)) FROM
        (SELECT document FROM documents WHERE is_total = 0 ORDER BY position))),
    '$.total', json((SELECT document FROM documents WHERE is_total = 1)));
