-- The exams of a period for statistics and outliers (store_load_exam_rows):
-- one row per exam whose local day (the date part of its first
-- acquisition as the modality gave it, else of its first receipt) is
-- between ?1 and ?2 ('YYYY-MM-DD', inclusive), ordered by Study Instance UID.
--
-- Context (room, preset, shift, transducer) from exam_context when the
-- policy engine has written it, else from the exam's first instance.
-- Estimated seconds from the current policy's exam_measurements when
-- present, else from the exam record. Time at or above each governing TI
-- threshold (0.7, 1.0, 1.5, 2.0) is summed over the exam timeline: each
-- capture's attributed seconds (already scaled by an SR scan time) count
-- when its displayed governing index is at or above the threshold (domain
-- reference section 5; an estimate). captures: image, multi-frame and
-- volume objects; indexed: those of them with at least one index.
WITH chosen AS (
    SELECT e.*,
           substr(coalesce(e.first_acquired_at,
                           (SELECT min(j.received_at) FROM instances j
                            WHERE j.study_instance_uid = e.study_instance_uid)), 1, 10) AS day
    FROM exams e
),
period AS (
    SELECT * FROM chosen WHERE day >= ?1 AND day <= ?2
),
current_policy AS (
    SELECT version FROM policies ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1
),
dwell AS (
    SELECT t.study_instance_uid,
           sum(iif(t.value >= 0.7, t.attributed_seconds, 0)) AS s07,
           sum(iif(t.value >= 1.0, t.attributed_seconds, 0)) AS s10,
           sum(iif(t.value >= 1.5, t.attributed_seconds, 0)) AS s15,
           sum(iif(t.value >= 2.0, t.attributed_seconds, 0)) AS s20
    FROM (SELECT tl.study_instance_uid, tl.attributed_seconds,
                 CASE p.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                        WHEN 'tic' THEN i.tic END AS value
          -- CROSS JOIN keeps this order: from the period's exams to their
          -- timelines, never a scan of every timeline (EXPLAIN QUERY PLAN,
          -- bench/query.py: 260 ms to 50 ms for a week of 90,000 instances).
          FROM period p
          CROSS JOIN exam_timeline tl ON tl.study_instance_uid = p.study_instance_uid
          CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid) AS t
    GROUP BY t.study_instance_uid
),
counts AS (
    SELECT i.study_instance_uid,
           count(*) AS captures,
           sum(iif(i.mi IS NOT NULL OR i.tis IS NOT NULL OR i.tib IS NOT NULL
                   OR i.tic IS NOT NULL, 1, 0)) AS indexed
    FROM instances i
    WHERE i.object_kind IN ('image', 'multiframe', 'volume')
      AND i.study_instance_uid IN (SELECT study_instance_uid FROM period)
    GROUP BY i.study_instance_uid
)
SELECT p.study_instance_uid,
       p.day,
       p.exam_type,
       p.exam_type_label,
       p.governing_index,
       CASE p.governing_index WHEN 'tis' THEN p.max_tis WHEN 'tib' THEN p.max_tib
                              WHEN 'tic' THEN p.max_tic END AS max_governing,
       p.max_mi,
       coalesce(c.room, f.room) AS room,
       coalesce(c.preset, f.preset) AS preset,
       coalesce(c.shift, f.shift) AS shift,
       coalesce(c.transducer, f.transducer_data) AS transducer,
       f.study_description,
       coalesce(m.estimated_seconds, p.estimated_seconds) AS estimated_seconds,
       coalesce(d.s07, 0), coalesce(d.s10, 0), coalesce(d.s15, 0), coalesce(d.s20, 0),
       coalesce(k.captures, 0), coalesce(k.indexed, 0),
       (SELECT count(*) FROM findings x
        WHERE x.study_instance_uid = p.study_instance_uid AND x.superseded = 0) AS finding_count,
       p.first_acquired_at
FROM period p
LEFT JOIN exam_context c ON c.study_instance_uid = p.study_instance_uid
LEFT JOIN instances f ON f.id = (SELECT j.id FROM instances j
                                 WHERE j.study_instance_uid = p.study_instance_uid
                                 ORDER BY coalesce(j.acquired_at, j.received_at), j.id
                                 LIMIT 1)
LEFT JOIN exam_measurements m ON m.study_instance_uid = p.study_instance_uid
                             AND m.policy_version = (SELECT version FROM current_policy)
LEFT JOIN dwell d ON d.study_instance_uid = p.study_instance_uid
LEFT JOIN counts k ON k.study_instance_uid = p.study_instance_uid
ORDER BY p.study_instance_uid;
