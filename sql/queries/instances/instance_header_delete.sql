-- Removes an instance's older header copy when it is re-sent under
-- retention none or full.
DELETE FROM instance_headers WHERE instance_id = :instance_id;
