-- An instance (re)stored: its older queue row goes (its reading belongs
-- to the latest receipt). ?1 instance id. Returns the path of a spool copy
-- that nobody will read any more, for the caller to delete.
DELETE FROM reading_queue WHERE instance_id = ?1 RETURNING iif(owned, path, NULL);
