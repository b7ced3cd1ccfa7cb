-- Ends the read transaction of read_begin.sql.
COMMIT;
