-- One backfill per database at a time, also across machines sharing one
-- PostgreSQL: a session-level advisory lock (PostgreSQL documentation,
-- "Advisory Lock Functions"), taken without waiting, held by the
-- backfill's writer connection until it closes; the server frees it when
-- that connection goes, also when the process is killed. The key is
-- mitilog's own (the text's hash, a fixed 64-bit number), 1 when taken,
-- 0 when another session holds it. SQLite has no such lock: the command
-- locks a file beside the database instead (src/cli/command_backfill.c).
SELECT CASE WHEN pg_try_advisory_lock(hashtextextended('mitilog backfill', 0)) THEN 1 ELSE 0 END;
