-- The instances of one study as a JSON array, in acquisition order
-- (instances without an acquisition time last), then by id.
-- ?1 study UID, ?2 received_at lower bound or NULL, ?3 limit.
-- The object's keys are the API's (docs/api.md); keep in step with
-- instances_since.sql.
SELECT json_group_array(json_object(
    'sop_instance_uid', sop_instance_uid,
    'study_instance_uid', study_instance_uid,
    'series_instance_uid', series_instance_uid,
    'sop_class_uid', sop_class_uid,
    'modality', modality,
    'station_name', station_name,
    'institutional_department_name', institutional_department_name,
    'study_description', study_description,
    'protocol_name', protocol_name,
    'acquired_at', acquired_at,
    'acquired_at_source', acquired_at_source,
    'received_at', received_at,
    'number_of_frames', number_of_frames,
    'frame_time_ms', frame_time_ms,
    'transfer_syntax_uid', transfer_syntax_uid,
    'calling_ae_title', calling_ae_title,
    'is_ultrasound', json(iif(is_ultrasound, 'true', 'false')),
    'mi', mi, 'tis', tis, 'tib', tib, 'tic', tic,
    'tis_focus', tis_focus, 'tis_surface', tis_surface,
    'index_status', json_object(
        'mi', mi_status, 'tis', tis_status, 'tib', tib_status,
        'tic', tic_status, 'tis_focus', tis_focus_status,
        'tis_surface', tis_surface_status),
    'index_raw', json_object(
        'mi', mi_raw, 'tis', tis_raw, 'tib', tib_raw, 'tic', tic_raw,
        'tis_focus', tis_focus_raw, 'tis_surface', tis_surface_raw),
    'replaced_count', replaced_count))
FROM (
    SELECT * FROM instances
    WHERE study_instance_uid = ?1
      AND (?2 IS NULL OR received_at >= ?2)
    ORDER BY acquired_at IS NULL, acquired_at, id
    LIMIT ?3);
