-- PostgreSQL's exam_summary_insert.sql (docs/postgresql-dialect.md): the same
-- statement with policies.row_order (012_baseline.sql) where SQLite orders
-- by its rowid, the order policies were first registered in.
-- The summary row of exam ?1 from what the tables hold now: its exam
-- record, first instance, context, counts, findings and the current
-- policy's measurement (none when the exam does not exist). After
-- exam_summary_delete.sql; exam_time_at_or_above_*.sql follow.
INSERT INTO exam_summaries (
    day, study_instance_uid, first_acquired_at, exam_type, exam_type_label,
    governing_index, max_governing, max_mi, estimated_seconds,
    first_key, first_id, first_room, first_preset, first_shift, first_transducer,
    study_description, context_room, context_preset, context_shift,
    context_transducer, measured_policy, measured_seconds, min_received_at,
    captures, indexed_count, finding_count)
SELECT coalesce(substr(coalesce(e.first_acquired_at, k.min_received_at), 1, 10), ''),
       e.study_instance_uid, e.first_acquired_at, e.exam_type, e.exam_type_label,
       e.governing_index,
       CASE e.governing_index WHEN 'tis' THEN e.max_tis WHEN 'tib' THEN e.max_tib
                              WHEN 'tic' THEN e.max_tic END,
       e.max_mi, e.estimated_seconds,
       coalesce(f.acquired_at, f.received_at), f.id, f.room, f.preset, f.shift,
       f.transducer_data, f.study_description,
       c.room, c.preset, c.shift, c.transducer,
       p.version,
       (SELECT m.estimated_seconds FROM exam_measurements m
        WHERE m.study_instance_uid = e.study_instance_uid AND m.policy_version = p.version),
       k.min_received_at, coalesce(k.captures, 0), coalesce(k.indexed, 0),
       (SELECT count(*) FROM findings x
        WHERE x.study_instance_uid = e.study_instance_uid AND x.superseded = 0)
FROM exams e
CROSS JOIN (SELECT sum(CASE WHEN j.object_kind = 'image' OR j.object_kind = 'multiframe'
                                OR j.object_kind = 'volume' THEN 1 ELSE 0 END) AS captures,
                   sum(CASE WHEN (j.object_kind = 'image' OR j.object_kind = 'multiframe'
                                  OR j.object_kind = 'volume')
                                 AND (j.mi IS NOT NULL OR j.tis IS NOT NULL
                                      OR j.tib IS NOT NULL OR j.tic IS NOT NULL)
                            THEN 1 ELSE 0 END) AS indexed,
                   min(j.received_at) AS min_received_at
            FROM instances j WHERE j.study_instance_uid = ?1) AS k
LEFT JOIN (SELECT version FROM policies
           ORDER BY first_loaded_at DESC, row_order DESC LIMIT 1) AS p ON 1 = 1
LEFT JOIN exam_context c ON c.study_instance_uid = e.study_instance_uid
LEFT JOIN instances f ON f.id = (SELECT j.id FROM instances j
                                 WHERE j.study_instance_uid = e.study_instance_uid
                                 ORDER BY coalesce(j.acquired_at, j.received_at), j.id
                                 LIMIT 1)
WHERE e.study_instance_uid = ?1;
