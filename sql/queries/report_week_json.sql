-- The weekly outlier document (docs/api.md, GET /api/v1/outliers) from the
-- scratch tables of report_schema.sql: the meta keys in order, then the
-- baselines per exam type and the ranked groups with their exams.
SELECT json_insert(
    (SELECT json_group_object(name, iif(is_bool, json(iif(value, 'true', 'false')), value))
     FROM (SELECT * FROM meta ORDER BY position)),
    '$.baselines', json((SELECT json_group_array(json_object(
        'exam_type', exam_type, 'count', count, 'trailing_count', trailing_count,
        'thin', json(iif(thin, 'true', 'false')),
        'median', median, 'mad', mad, 'p95', p95))
        FROM (SELECT * FROM baselines ORDER BY position))),
    '$.groups', json((SELECT json_group_array(json_object(
        'rank', g.position, 'key', g.key, 'exam_count', g.exam_count,
        'valued_count', g.valued_count, 'outlier_count', g.outlier_count,
        'outlier_rate', g.outlier_rate, 'median_governing', g.median_governing,
        'department_median', g.department_median, 'median_ratio', g.median_ratio,
        'median_mi', g.median_mi, 'captures', g.capture_count,
        'captures_with_indices', g.indexed_count, 'data_completeness', g.completeness,
        'finding_count', g.finding_count,
        'findings_by_rule', json((SELECT json_group_array(json_object(
            'rule_id', r.rule_id, 'count', r.count))
            FROM (SELECT * FROM group_rules r WHERE r.group_position = g.position
                  ORDER BY r.rule_id) AS r)),
        'exams', json((SELECT json_group_array(json_object(
            'study_instance_uid', x.study_instance_uid, 'study_key', x.study_key,
            'day', x.day, 'first_acquired_at', x.first_acquired_at,
            'exam_type', x.exam_type, 'exam_type_label', x.exam_type_label,
            'study_description', x.study_description, 'room', x.room,
            'preset', x.preset, 'shift', x.shift, 'transducer', x.transducer,
            'governing_index', x.governing_index, 'max_governing', x.max_governing,
            'max_mi', x.max_mi, 'robust_z', x.robust_z,
            'above_robust_z', json(iif(x.above_robust_z, 'true', 'false')),
            'above_p95', json(iif(x.above_p95, 'true', 'false')),
            'outlier', json(iif(x.outlier, 'true', 'false')),
            'finding_count', x.finding_count,
            'baseline_thin', json(iif(x.baseline_thin, 'true', 'false')),
            'baseline_median', x.baseline_median, 'baseline_p95', x.baseline_p95,
            'estimated_seconds', x.estimated_seconds))
            FROM (SELECT * FROM group_exams x WHERE x.group_position = g.position
                  ORDER BY x.position) AS x))))
        FROM (SELECT * FROM groups ORDER BY position) AS g)));
