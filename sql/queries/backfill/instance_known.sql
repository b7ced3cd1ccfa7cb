-- Whether an instance is stored: ?1 SOP Instance UID.
SELECT count(*) FROM instances WHERE sop_instance_uid = ?1;
