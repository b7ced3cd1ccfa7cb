-- Writer connection: write-ahead log, so that the read connection (HTTP
-- API) never waits for the writer and the writer never waits for readers.
-- Returns the journal mode now in force; store_open() insists on 'wal'.
PRAGMA journal_mode = WAL;
