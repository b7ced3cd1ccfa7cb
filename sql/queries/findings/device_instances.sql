-- Ultrasound instances of one day (?1 'YYYY-MM-DD', on acquisition, else
-- receipt) for rule output_not_reported: SOP UID, study, room (or, without
-- one, the station name), transducer, whether any index is ok in the header
-- or read from the screen (migration 007), acquired_at.
SELECT sop_instance_uid, study_instance_uid, coalesce(room, station_name, ''),
       coalesce(transducer_data, ''),
       (mi_status = 'ok' OR tis_status = 'ok' OR tib_status = 'ok' OR tic_status = 'ok'
        OR tis_focus_status = 'ok' OR tis_surface_status = 'ok'
        OR EXISTS (SELECT 1 FROM screen_readings r WHERE r.instance_id = instances.id
                   AND (r.mi_status = 'read' OR r.tis_status = 'read' OR r.tib_status = 'read'
                        OR r.tic_status = 'read' OR r.tis_focus_status = 'read'
                        OR r.tis_surface_status = 'read'))),
       acquired_at
FROM instances
WHERE is_ultrasound = 1 AND object_kind IN ('image', 'multiframe', 'volume')
  AND substr(coalesce(acquired_at, received_at), 1, 10) = ?1
ORDER BY coalesce(acquired_at, received_at), id;
