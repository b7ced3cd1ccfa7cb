-- The table's rows are in.
COMMIT;
