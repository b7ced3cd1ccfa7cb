-- Writer connection settings, after journal_mode = WAL.
--
-- synchronous = FULL, not NORMAL: the daemon acknowledges a C-STORE only
-- after the commit that holds the record. In WAL mode NORMAL does not sync
-- the WAL on each commit, so a power loss could lose transactions that were
-- already acknowledged to the modality, which would then never re-send
-- them. FULL syncs the WAL at every commit; group commit (store_commit.c)
-- keeps the number of syncs low under load.
PRAGMA synchronous = FULL;
PRAGMA foreign_keys = ON;
-- The WAL is copied into the database (checkpointed) once it holds 8192
-- pages (32 MiB at 4 KiB pages) rather than SQLite's default 1000: the
-- commit that crosses the mark waits for the copy and its sync, and the
-- index and table pages that every commit rewrites are copied once per
-- checkpoint, so fewer checkpoints copy much less. After a checkpoint the
-- WAL file is cut back to at most 64 MiB.
PRAGMA wal_autocheckpoint = 8192;
PRAGMA journal_size_limit = 67108864;
-- Page cache of 16 MiB (SQLite's default is 2 MiB): the indexes by SOP
-- Instance UID and by study are written at random places, and with a
-- small cache every commit read their pages back from the file.
PRAGMA cache_size = -16384;
