-- The reading of a queued object is written: its queue row goes, and only
-- when it still names the file that was read (a re-sent object queued
-- again in the meantime keeps its new row). ?1 instance id, ?2 path.
DELETE FROM reading_queue WHERE instance_id = ?1 AND path = ?2 RETURNING instance_id;
