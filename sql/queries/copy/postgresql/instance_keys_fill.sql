-- PostgreSQL's instance_keys (one row per SOP Instance UID across the
-- month partitions, migrations/postgresql/012_baseline.sql) for the
-- instances just copied; SQLite has no such table, its unique index does
-- the work.
INSERT INTO instance_keys (sop_instance_uid, id, first_received_at)
SELECT sop_instance_uid, id, first_received_at
FROM instances;
