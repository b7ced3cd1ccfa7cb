-- At close: copy the WAL into the database file and truncate the WAL, so
-- that the file alone is a complete database (backups, sqlite3 CLI).
PRAGMA wal_checkpoint(TRUNCATE);
