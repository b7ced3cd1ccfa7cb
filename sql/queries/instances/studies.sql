-- One JSON object per study, as a JSON array ordered by the study's first
-- acquisition. ?1 from, ?2 to: dates 'YYYY-MM-DD', inclusive, NULL = open.
--
-- A study belongs to the date of its first instance (the date part of
-- acquired_at as the modality gave it, or of received_at when an instance
-- has no acquisition time), so that a study running past midnight is
-- counted in one period only. The counts and maxima cover the whole study.
-- max_*: the largest 'ok' value of each index (the value columns hold
-- numbers only for 'ok'), null when none. Instances without a Study
-- Instance UID belong to no study and are left out.
-- station_name, study_description, transducer, preset, room, shift and
-- age_group are those of the first instance; modes: of all instances.
WITH ranked AS (
    SELECT *,
           coalesce(acquired_at, received_at) AS effective_at,
           row_number() OVER (PARTITION BY study_instance_uid
                              ORDER BY coalesce(acquired_at, received_at), id)
               AS position
    FROM instances
    WHERE study_instance_uid IS NOT NULL
),
studies AS (
    SELECT study_instance_uid,
           max(iif(position = 1, study_description, NULL)) AS study_description,
           max(iif(position = 1, station_name, NULL)) AS station_name,
           count(*) AS instance_count,
           min(acquired_at) AS first_acquired_at,
           max(acquired_at) AS last_acquired_at,
           min(effective_at) AS first_effective_at,
           max(mi) AS max_mi,
           max(tis) AS max_tis,
           max(tib) AS max_tib,
           max(tic) AS max_tic,
           max(tis_focus) AS max_tis_focus,
           max(tis_surface) AS max_tis_surface,
           max(iif(position = 1, transducer_data, NULL)) AS transducer,
           max(iif(position = 1, frequency_khz / 1000.0, NULL)) AS frequency_mhz,
           max(iif(position = 1, preset, NULL)) AS preset,
           max(iif(position = 1, room, NULL)) AS room,
           max(iif(position = 1, shift, NULL)) AS shift,
           max(iif(position = 1, age_group, NULL)) AS age_group,
           (SELECT json_group_array(mode) FROM
               (SELECT n.mode FROM mode_names n
                WHERE EXISTS (SELECT 1 FROM instances j
                              WHERE j.study_instance_uid = ranked.study_instance_uid
                                AND (j.modes >> n.rank) & 1)
                ORDER BY n.rank)) AS modes
    FROM ranked
    GROUP BY study_instance_uid
)
SELECT json_group_array(json_object(
    'study_instance_uid', s.study_instance_uid,
    'study_description', s.study_description,
    'station_name', s.station_name,
    'instance_count', s.instance_count,
    'first_acquired_at', s.first_acquired_at,
    'last_acquired_at', s.last_acquired_at,
    'max_mi', s.max_mi,
    'max_tis', s.max_tis,
    'max_tib', s.max_tib,
    'max_tic', s.max_tic,
    'max_tis_focus', s.max_tis_focus,
    'max_tis_surface', s.max_tis_surface,
    -- The exam record (migration 002), null until it has been built.
    'exam_type', e.exam_type,
    'exam_type_label', e.exam_type_label,
    'governing_index', e.governing_index,
    'max_governing', CASE e.governing_index WHEN 'tis' THEN s.max_tis
                     WHEN 'tib' THEN s.max_tib WHEN 'tic' THEN s.max_tic END,
    'gestational_age_weeks', e.gestational_age_weeks,
    'modes', json(s.modes),
    'transducer', s.transducer,
    'frequency_mhz', s.frequency_mhz,
    'preset', s.preset,
    'room', s.room,
    'shift', s.shift,
    'age_group', s.age_group,
    'estimated_scan_seconds', e.estimated_seconds,
    'source', json_object(
        'exam_type', e.exam_type_source,
        'governing_index', e.governing_index_source,
        'gestational_age_weeks', e.gestational_age_source,
        'transducer', 'first instance',
        'preset', 'first instance',
        'room', 'first instance',
        'shift', 'first instance',
        'age_group', 'first instance')))
FROM (
    SELECT * FROM studies
    WHERE (CAST(?1 AS TEXT) IS NULL OR substr(first_effective_at, 1, 10) >= ?1)
      AND (CAST(?2 AS TEXT) IS NULL OR substr(first_effective_at, 1, 10) <= ?2)
    ORDER BY first_effective_at, study_instance_uid) AS s
LEFT JOIN exams e ON e.study_instance_uid = s.study_instance_uid;
