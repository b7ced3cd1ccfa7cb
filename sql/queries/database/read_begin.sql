-- One snapshot for the several statements of one read (store_reports.c).
BEGIN DEFERRED;
