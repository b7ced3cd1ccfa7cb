-- The newest unfinished run was stopped (SIGINT, SIGTERM): ?1 message,
-- ?2 now. A run killed outright keeps its last state instead.
UPDATE backfill_runs
SET state = 'interrupted', message = ?1, updated_at = ?2, finished_at = ?2
WHERE id = (SELECT max(id) FROM backfill_runs WHERE state IN ('running', 'waiting'));
