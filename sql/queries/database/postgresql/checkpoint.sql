-- PostgreSQL: at close, one commit flushed by the server
-- (synchronous_commit = on; txid_current() makes it a commit that writes
-- a record), which flushes every earlier commit of the log with it, also
-- those made with synchronous_commit = off (durability = process,
-- import). The server checkpoints by itself.
SET synchronous_commit = on;
SELECT txid_current();
