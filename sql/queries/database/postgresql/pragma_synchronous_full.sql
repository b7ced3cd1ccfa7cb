-- PostgreSQL: [storage] durability has no counterpart on a server the
-- receiver does not own: every commit waits for the server's flush
-- (synchronous_commit = on), so that a crash of the server loses nothing
-- acknowledged; the server's own settings (fsync) govern the rest.
SET synchronous_commit = on;
