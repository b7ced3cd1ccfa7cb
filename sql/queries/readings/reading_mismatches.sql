-- Captures of a study whose header and screen disagree beyond the screen's
-- rounding (half a unit of the last decimal drawn), for the finding
-- header_screen_mismatch (docs/policy.md): SOP UID, index, header value,
-- screen value, characters read, decimals drawn, room (or station name),
-- profile key and version. ?1 study UID.
SELECT i.sop_instance_uid, 'mi', i.mi, r.mi, r.mi_text, r.mi_decimals,
       trim(coalesce(i.room, i.station_name, '')), r.profile_key, r.profile_version
FROM instances i JOIN screen_readings r ON r.instance_id = i.id
WHERE i.study_instance_uid = ?1 AND i.mi_status = 'ok' AND r.mi_status = 'read'
  AND abs(i.mi - r.mi) > CASE r.mi_decimals WHEN 0 THEN 0.5 WHEN 1 THEN 0.05
                              WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9
UNION ALL
SELECT i.sop_instance_uid, 'tis', i.tis, r.tis, r.tis_text, r.tis_decimals,
       trim(coalesce(i.room, i.station_name, '')), r.profile_key, r.profile_version
FROM instances i JOIN screen_readings r ON r.instance_id = i.id
WHERE i.study_instance_uid = ?1 AND i.tis_status = 'ok' AND r.tis_status = 'read'
  AND abs(i.tis - r.tis) > CASE r.tis_decimals WHEN 0 THEN 0.5 WHEN 1 THEN 0.05
                              WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9
UNION ALL
SELECT i.sop_instance_uid, 'tib', i.tib, r.tib, r.tib_text, r.tib_decimals,
       trim(coalesce(i.room, i.station_name, '')), r.profile_key, r.profile_version
FROM instances i JOIN screen_readings r ON r.instance_id = i.id
WHERE i.study_instance_uid = ?1 AND i.tib_status = 'ok' AND r.tib_status = 'read'
  AND abs(i.tib - r.tib) > CASE r.tib_decimals WHEN 0 THEN 0.5 WHEN 1 THEN 0.05
                              WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9
UNION ALL
SELECT i.sop_instance_uid, 'tic', i.tic, r.tic, r.tic_text, r.tic_decimals,
       trim(coalesce(i.room, i.station_name, '')), r.profile_key, r.profile_version
FROM instances i JOIN screen_readings r ON r.instance_id = i.id
WHERE i.study_instance_uid = ?1 AND i.tic_status = 'ok' AND r.tic_status = 'read'
  AND abs(i.tic - r.tic) > CASE r.tic_decimals WHEN 0 THEN 0.5 WHEN 1 THEN 0.05
                              WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9
UNION ALL
SELECT i.sop_instance_uid, 'tis_focus', i.tis_focus, r.tis_focus, r.tis_focus_text, r.tis_focus_decimals,
       trim(coalesce(i.room, i.station_name, '')), r.profile_key, r.profile_version
FROM instances i JOIN screen_readings r ON r.instance_id = i.id
WHERE i.study_instance_uid = ?1 AND i.tis_focus_status = 'ok' AND r.tis_focus_status = 'read'
  AND abs(i.tis_focus - r.tis_focus) > CASE r.tis_focus_decimals WHEN 0 THEN 0.5 WHEN 1 THEN 0.05
                              WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9
UNION ALL
SELECT i.sop_instance_uid, 'tis_surface', i.tis_surface, r.tis_surface, r.tis_surface_text, r.tis_surface_decimals,
       trim(coalesce(i.room, i.station_name, '')), r.profile_key, r.profile_version
FROM instances i JOIN screen_readings r ON r.instance_id = i.id
WHERE i.study_instance_uid = ?1 AND i.tis_surface_status = 'ok' AND r.tis_surface_status = 'read'
  AND abs(i.tis_surface - r.tis_surface) > CASE r.tis_surface_decimals WHEN 0 THEN 0.5 WHEN 1 THEN 0.05
                              WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9
ORDER BY 1, 2;
