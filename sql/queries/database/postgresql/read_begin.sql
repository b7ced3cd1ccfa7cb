-- PostgreSQL: one snapshot for the several statements of one read
-- (store_reports.c), as SQLite's read transaction gives.
BEGIN ISOLATION LEVEL REPEATABLE READ READ ONLY;
