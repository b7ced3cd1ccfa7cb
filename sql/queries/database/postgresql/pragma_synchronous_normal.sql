-- PostgreSQL: [storage] durability = process (and import): COMMIT returns
-- before the server has flushed it (synchronous_commit = off). What is
-- committed survives this process being killed, since the server holds
-- it, but a crash of the server may lose the last fraction of a second
-- of commits (PostgreSQL documentation, 30.4 "Asynchronous Commit"), as a
-- power loss may lose them with SQLite. checkpoint.sql flushes at close.
SET synchronous_commit = off;
