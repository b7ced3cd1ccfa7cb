-- The table's copy failed: none of its rows stay.
ROLLBACK;
