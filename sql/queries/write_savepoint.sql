-- Group commit: one savepoint per record, so a bad record fails alone.
SAVEPOINT record;
