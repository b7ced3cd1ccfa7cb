-- A study's instances as ext_exam_instance needs them (store_load_study),
-- in acquisition order (untimed last), then id. ?1 study UID.
-- Columns: 0 sop_instance_uid, 1 object_kind, 2 acquired_at, 3 exam_type,
-- 4 exam_type_source, 5 has_acoustic_record, 6-17 value/status per index
-- (mi, tis, tib, tic, tis_focus, tis_surface), 18 modes, 19 cine_seconds,
-- 20 SR gestational age (weeks), 21 its item position, 22 SR scan time (s).
-- The value of an index is the one the rules use: the one read from the
-- screen (migration 007) when the policy prefers it (index_source_setting)
-- or the header has none, else the header's.
SELECT i.sop_instance_uid, i.object_kind, i.acquired_at, i.exam_type,
       i.exam_type_source, i.has_acoustic_record,
       CASE WHEN (r.mi_status IS NOT NULL AND r.mi_status = 'read' AND (p.preferred = 'screen' OR i.mi_status <> 'ok')) THEN r.mi ELSE i.mi END,
       CASE WHEN (r.mi_status IS NOT NULL AND r.mi_status = 'read' AND (p.preferred = 'screen' OR i.mi_status <> 'ok')) THEN 'ok' ELSE i.mi_status END,
       CASE WHEN (r.tis_status IS NOT NULL AND r.tis_status = 'read' AND (p.preferred = 'screen' OR i.tis_status <> 'ok')) THEN r.tis ELSE i.tis END,
       CASE WHEN (r.tis_status IS NOT NULL AND r.tis_status = 'read' AND (p.preferred = 'screen' OR i.tis_status <> 'ok')) THEN 'ok' ELSE i.tis_status END,
       CASE WHEN (r.tib_status IS NOT NULL AND r.tib_status = 'read' AND (p.preferred = 'screen' OR i.tib_status <> 'ok')) THEN r.tib ELSE i.tib END,
       CASE WHEN (r.tib_status IS NOT NULL AND r.tib_status = 'read' AND (p.preferred = 'screen' OR i.tib_status <> 'ok')) THEN 'ok' ELSE i.tib_status END,
       CASE WHEN (r.tic_status IS NOT NULL AND r.tic_status = 'read' AND (p.preferred = 'screen' OR i.tic_status <> 'ok')) THEN r.tic ELSE i.tic END,
       CASE WHEN (r.tic_status IS NOT NULL AND r.tic_status = 'read' AND (p.preferred = 'screen' OR i.tic_status <> 'ok')) THEN 'ok' ELSE i.tic_status END,
       CASE WHEN (r.tis_focus_status IS NOT NULL AND r.tis_focus_status = 'read' AND (p.preferred = 'screen' OR i.tis_focus_status <> 'ok')) THEN r.tis_focus ELSE i.tis_focus END,
       CASE WHEN (r.tis_focus_status IS NOT NULL AND r.tis_focus_status = 'read' AND (p.preferred = 'screen' OR i.tis_focus_status <> 'ok')) THEN 'ok' ELSE i.tis_focus_status END,
       CASE WHEN (r.tis_surface_status IS NOT NULL AND r.tis_surface_status = 'read' AND (p.preferred = 'screen' OR i.tis_surface_status <> 'ok')) THEN r.tis_surface ELSE i.tis_surface END,
       CASE WHEN (r.tis_surface_status IS NOT NULL AND r.tis_surface_status = 'read' AND (p.preferred = 'screen' OR i.tis_surface_status <> 'ok')) THEN 'ok' ELSE i.tis_surface_status END,
       i.modes, i.cine_seconds,
       (SELECT normalised FROM sr_values s
        WHERE s.instance_id = i.id AND s.quantity = 'gestational_age'
          AND s.normalised IS NOT NULL ORDER BY s.id LIMIT 1),
       (SELECT item_position FROM sr_values s
        WHERE s.instance_id = i.id AND s.quantity = 'gestational_age'
          AND s.normalised IS NOT NULL ORDER BY s.id LIMIT 1),
       (SELECT max(normalised) FROM sr_values s
        WHERE s.instance_id = i.id AND s.quantity = 'scan_time')
FROM instances i
JOIN index_source_setting p ON p.only_row = 1
LEFT JOIN screen_readings r ON r.instance_id = i.id
WHERE i.study_instance_uid = ?1
ORDER BY i.acquired_at IS NULL, i.acquired_at, i.id;
