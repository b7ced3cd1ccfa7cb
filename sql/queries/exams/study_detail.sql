-- GET /api/v1/studies/{uid}: one exam with its instances (acquisition
-- order), timeline (time order), per-mode maxima and SR values; no row
-- when the study has no instance. ?1 study UID, ?2 the active policy
-- version (NULL: the latest evaluated). findings: current (not superseded)
-- findings of the study; measurements: the evaluation's values.
-- The timeline is an ESTIMATE (docs/extraction.md, "Exam timeline").
SELECT json_object(
    'study_instance_uid', ?1,
    'exam_type', e.exam_type,
    'exam_type_label', e.exam_type_label,
    'governing_index', e.governing_index,
    'group', e.exam_group,
    'gestational_age_weeks', e.gestational_age_weeks,
    'first_acquired_at', e.first_acquired_at,
    'last_acquired_at', e.last_acquired_at,
    'instance_count', (SELECT count(*) FROM instances WHERE study_instance_uid = ?1),
    'capture_count', e.capture_count,
    'cine_count', e.cine_count,
    'sr_count', e.sr_count,
    'other_count', e.other_count,
    'maxima', json_object('mi', e.max_mi, 'tis', e.max_tis, 'tib', e.max_tib,
                          'tic', e.max_tic, 'tis_focus', e.max_tis_focus,
                          'tis_surface', e.max_tis_surface),
    'maxima_by_mode', (SELECT json_group_object(mode, json(maxima)) FROM
        (SELECT mode, json_group_object(index_name, max_value) AS maxima
         FROM (SELECT * FROM exam_mode_maxima WHERE study_instance_uid = ?1
               ORDER BY rank, index_name)
         GROUP BY mode ORDER BY min(rank))),
    'timeline_summary', json_object(
        'estimate', json('true'),
        'estimated_seconds', e.estimated_seconds,
        'unscaled_seconds', e.unscaled_seconds,
        'scale', e.scale,
        'span_seconds', e.span_seconds,
        'timed_count', e.timed_count,
        'untimed_count', e.untimed_count,
        'capped_count', e.capped_count,
        'gap_cap_seconds', e.gap_cap_seconds,
        'sr_scan_time_seconds', e.sr_scan_time_seconds),
    'timeline', (SELECT json_group_array(json_object(
            'position', t.position, 'sop_instance_uid', t.sop_instance_uid,
            'start_seconds', t.start_seconds, 'interval_seconds', t.interval_seconds,
            'cine_seconds', t.cine_seconds, 'attributed_seconds', t.attributed_seconds,
            'capped', json(iif(t.capped, 'true', 'false')),
            'indices', json((SELECT v.indices FROM instances i
                             JOIN instance_provenance v ON v.instance_id = i.id
                             WHERE i.sop_instance_uid = t.sop_instance_uid))))
        FROM (SELECT * FROM exam_timeline WHERE study_instance_uid = ?1
              ORDER BY position) t),
    'source', json_object(
        'exam_type', e.exam_type_source,
        'governing_index', e.governing_index_source,
        'gestational_age_weeks', e.gestational_age_source),
    'updated_at', e.updated_at,
    'context', json((SELECT json_object('room', room, 'preset', preset, 'shift', shift,
                    'transducer', transducer, 'age_group', age_group,
                    'last_received_at', last_received_at,
                    'closed', json(iif(closed, 'true', 'false')))
                FROM exam_context WHERE study_instance_uid = ?1)),
    'findings', (SELECT json_group_array(json_object(
            'id', id, 'rule_id', rule_id, 'severity', severity, 'quantity', quantity,
            'measured_value', measured_value, 'unit', unit, 'limit_value', limit_value,
            'threshold', threshold, 'governing_index', governing_index,
            'instance_uids', json(instance_uids), 'started_at', started_at,
            'ended_at', ended_at, 'estimated_seconds', estimated_seconds,
            'assumptions', assumptions, 'source', source_text,
            'provisional', json(iif(provisional, 'true', 'false')),
            'policy_version', policy_version, 'evaluated_at', evaluated_at))
        FROM (SELECT * FROM findings WHERE study_instance_uid = ?1 AND superseded = 0
              ORDER BY id)),
    'measurements', json((SELECT json_object(
            'policy_version', policy_version, 'governing_index', governing_index,
            'max_governing', max_governing, 'max_mi', max_mi,
            'cem43_minutes', cem43_minutes, 'estimated_seconds', estimated_seconds,
            'doppler_seconds', doppler_seconds,
            'seconds_at_or_above', json((SELECT json_group_object(CAST(t.threshold AS TEXT),
                                                                  t.seconds)
                                         FROM (SELECT threshold, seconds
                                               FROM exam_measurement_time_at_or_above x
                                               WHERE x.study_instance_uid = m.study_instance_uid
                                                 AND x.policy_version = m.policy_version
                                               ORDER BY threshold) AS t)),
            'estimate', json('true'), 'evaluated_at', evaluated_at)
        FROM exam_measurements m WHERE study_instance_uid = ?1
        ORDER BY policy_version = ?2 DESC, evaluated_at DESC LIMIT 1)),
    'instances', (SELECT json_group_array(json(document)) FROM
        (SELECT json_set(d.document, '$.indices', json(v.indices),
                         '$.screen_reading', json(v.screen_reading)) AS document
         FROM instance_documents d JOIN instance_provenance v ON v.instance_id = d.id
         WHERE d.study_instance_uid = ?1
         ORDER BY d.acquired_at IS NULL, d.acquired_at, d.id)))
FROM (SELECT 1 FROM instances WHERE study_instance_uid = ?1 LIMIT 1)
LEFT JOIN exams e ON e.study_instance_uid = ?1;
