-- Before writing an instance's modes again (a re-sent object): ?1 id.
DELETE FROM instance_modes WHERE instance_id = ?1;
