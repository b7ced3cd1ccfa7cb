-- Group commit: keep the record's changes in the batch.
RELEASE record;
