-- PostgreSQL: writer session settings. A commit returns only once the
-- server has flushed it (synchronous_commit = on, PostgreSQL's default,
-- said again here): a C-STORE is acknowledged after its commit, and a
-- crash of the server must not lose it.
SET synchronous_commit = on;
