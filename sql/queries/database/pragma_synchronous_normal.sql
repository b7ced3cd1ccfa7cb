-- [storage] durability = process: commits survive the daemon being killed
-- (the WAL is written before the C-STORE is answered) but not a power loss
-- or kernel crash, because the WAL is synced only at checkpoints. This is
-- the guarantee of a receiver that writes files without syncing them.
PRAGMA synchronous = NORMAL;
