-- A run's progress: ?1 id, ?2 state, ?3 message, ?4 studies found,
-- ?5 done, ?6 failed, ?7 objects, ?8 objects per minute (NULL unknown),
-- ?9 seconds left (NULL unknown), ?10 now, ?11 finished (1) or not (0).
UPDATE backfill_runs
SET state = ?2, message = ?3, studies_found = ?4, studies_done = ?5, studies_failed = ?6,
    objects = ?7, objects_per_minute = ?8, seconds_left = ?9, updated_at = ?10,
    finished_at = CASE WHEN ?11 = 1 THEN ?10 ELSE NULL END
WHERE id = ?1;
