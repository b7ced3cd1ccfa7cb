-- The header copy of one instance by SOP Instance UID (mitilog header).
SELECT h.bytes
FROM instances AS i JOIN instance_headers AS h ON h.instance_id = i.id
WHERE i.sop_instance_uid = :sop_instance_uid;
