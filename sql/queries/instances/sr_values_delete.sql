-- Before writing an instance's SR values again: ?1 instance id.
DELETE FROM sr_values WHERE instance_id = ?1;
