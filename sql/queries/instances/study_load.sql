-- A study's instances as ext_exam_instance needs them (store_load_study),
-- in acquisition order (untimed last), then id. ?1 study UID.
-- Columns: 0 sop_instance_uid, 1 object_kind, 2 acquired_at, 3 exam_type,
-- 4 exam_type_source, 5 has_acoustic_record, 6-17 value/status per index
-- (mi, tis, tib, tic, tis_focus, tis_surface), 18 modes, 19 cine_seconds,
-- 20 SR gestational age (weeks), 21 its item position, 22 SR scan time (s).
SELECT i.sop_instance_uid, i.object_kind, i.acquired_at, i.exam_type,
       i.exam_type_source, i.has_acoustic_record,
       i.mi, i.mi_status, i.tis, i.tis_status, i.tib, i.tib_status,
       i.tic, i.tic_status, i.tis_focus, i.tis_focus_status,
       i.tis_surface, i.tis_surface_status,
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
WHERE i.study_instance_uid = ?1
ORDER BY i.acquired_at IS NULL, i.acquired_at, i.id;
