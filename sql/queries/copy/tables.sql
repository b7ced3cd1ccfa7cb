-- The tables of the database copied from, each with 1 when it has a rowid
-- (its rows are then read in rowid order, the order they were inserted in,
-- which PostgreSQL's policies keep as row_order). The copy fills the
-- tables in the order of the database copied into.
SELECT name, sql NOT LIKE '%WITHOUT ROWID%' AS has_rowid
FROM sqlite_schema
WHERE type = 'table' AND name NOT LIKE 'sqlite\_%' ESCAPE '\'
ORDER BY name;
