-- A run starts: ?1 source, ?2 now. Gives the run's id.
INSERT INTO backfill_runs (source, state, started_at, updated_at)
VALUES (?1, 'running', ?2, ?2)
RETURNING id;
