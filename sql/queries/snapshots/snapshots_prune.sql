-- Forgets documents last asked for before ?1 (ISO 8601 UTC): they are
-- made again if they are ever asked for.
DELETE FROM report_snapshots WHERE asked_at < ?1;
