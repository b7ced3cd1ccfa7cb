-- [storage] durability = power_loss (default): every commit syncs the WAL
-- before the C-STORE is answered (see pragma_writer.sql).
PRAGMA synchronous = FULL;
