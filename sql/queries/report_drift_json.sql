-- The preset drift document (docs/api.md, GET /api/v1/drift).
SELECT json_insert(
    (SELECT json_group_object(name, iif(is_bool, json(iif(value, 'true', 'false')), value))
     FROM (SELECT * FROM meta ORDER BY position)),
    '$.series', json((SELECT json_group_array(json_object(
        'preset', s.preset, 'room', s.room, 'exam_type', s.exam_type,
        'flagged_weeks', s.flagged_count, 'max_abs_z', s.max_abs_z,
        'points', json((SELECT json_group_array(json_object(
            'week', p.week, 'monday', p.monday, 'count', p.count, 'median', p.median,
            'baseline_count', p.baseline_count, 'baseline_median', p.baseline_median,
            'baseline_mad', p.baseline_mad, 'z', p.z,
            'flagged', json(iif(p.flagged, 'true', 'false'))))
            FROM (SELECT * FROM drift_points p WHERE p.series_position = s.position
                  ORDER BY p.position) AS p))))
        FROM (SELECT * FROM drift_series ORDER BY position) AS s)));
