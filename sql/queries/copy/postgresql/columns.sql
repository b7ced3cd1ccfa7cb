-- The columns of table ?1 in their order: name, position in the primary
-- key (0: not part of it), 1 when a row must give it (NOT NULL without a
-- default or identity).
SELECT a.attname::text AS name,
       coalesce(array_position(k.conkey, a.attnum), 0) AS pk,
       CASE WHEN a.attnotnull AND NOT a.atthasdef AND a.attidentity = '' THEN 1 ELSE 0 END
           AS required
FROM pg_attribute a
JOIN pg_class c ON c.oid = a.attrelid
LEFT JOIN pg_constraint k ON k.conrelid = c.oid AND k.contype = 'p'
WHERE c.relnamespace = current_schema()::regnamespace
  AND c.relname = ?1
  AND a.attnum > 0
  AND NOT a.attisdropped
ORDER BY a.attnum;
