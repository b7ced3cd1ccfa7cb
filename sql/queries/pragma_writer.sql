-- Writer connection settings, after journal_mode = WAL.
--
-- synchronous = FULL, not NORMAL: the daemon acknowledges a C-STORE only
-- after the commit that holds the record. In WAL mode NORMAL does not sync
-- the WAL on each commit, so a power loss could lose transactions that were
-- already acknowledged to the modality, which would then never re-send
-- them. FULL syncs the WAL at every commit; group commit (store_write.c)
-- keeps the number of syncs low under load.
PRAGMA synchronous = FULL;
PRAGMA foreign_keys = ON;
