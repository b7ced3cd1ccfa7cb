-- Group commit: drop the failed record's changes, keep the batch.
ROLLBACK TO record;
