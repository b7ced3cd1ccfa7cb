-- PostgreSQL: [storage] durability = power_loss (the default): COMMIT
-- returns only once the server has flushed it (synchronous_commit = on),
-- so that a crash of the server loses nothing acknowledged.
SET synchronous_commit = on;
