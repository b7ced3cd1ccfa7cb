-- The tables of the database copied into (partitions are reached through
-- their parent), each after every table its foreign keys refer to, so that
-- they can be filled in this order; has_rowid is always 0 here.
WITH RECURSIVE tables AS (
    SELECT c.oid, c.relname
    FROM pg_class c
    WHERE c.relnamespace = current_schema()::regnamespace
      AND c.relkind IN ('r', 'p')
      AND NOT c.relispartition
), depth (oid, level) AS (
    SELECT oid, 0 FROM tables
    UNION ALL
    SELECT k.conrelid, d.level + 1
    FROM pg_constraint k
    JOIN depth d ON k.confrelid = d.oid
    WHERE k.contype = 'f' AND k.conrelid <> k.confrelid AND d.level < 64
)
SELECT t.relname::text AS name, 0 AS has_rowid
FROM tables t
JOIN depth d ON d.oid = t.oid
GROUP BY t.relname
ORDER BY max(d.level), t.relname;
