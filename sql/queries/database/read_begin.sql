-- One snapshot for the several statements of one read (store_read_stats.c).
BEGIN DEFERRED;
