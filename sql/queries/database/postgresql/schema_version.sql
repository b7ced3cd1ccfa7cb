-- PostgreSQL: the schema version, kept in schema_version (SQLite:
-- PRAGMA user_version); 0 before the baseline made it.
SELECT coalesce((SELECT version FROM schema_version WHERE only_row = 1), 0);
