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
-- station_name and study_description are those of the first instance.
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
           max(tis_surface) AS max_tis_surface
    FROM ranked
    GROUP BY study_instance_uid
)
SELECT json_group_array(json_object(
    'study_instance_uid', study_instance_uid,
    'study_description', study_description,
    'station_name', station_name,
    'instance_count', instance_count,
    'first_acquired_at', first_acquired_at,
    'last_acquired_at', last_acquired_at,
    'max_mi', max_mi,
    'max_tis', max_tis,
    'max_tib', max_tib,
    'max_tic', max_tic,
    'max_tis_focus', max_tis_focus,
    'max_tis_surface', max_tis_surface))
FROM (
    SELECT * FROM studies
    WHERE (?1 IS NULL OR substr(first_effective_at, 1, 10) >= ?1)
      AND (?2 IS NULL OR substr(first_effective_at, 1, 10) <= ?2)
    ORDER BY first_effective_at, study_instance_uid);
