-- The SR values of one instance by quantity, in insertion order: the
-- exam rebuild looks up an instance's first gestational age and its scan
-- time (study_load.sql: WHERE instance_id = ? AND quantity = ? ORDER BY
-- id LIMIT 1). With an index on instance_id alone, PostgreSQL's planner
-- may walk the primary key in id order and filter every row of the
-- month; with this one both engines go straight to the instance's rows,
-- already in order. It covers what sr_values_instance served.
CREATE INDEX sr_values_instance_quantity ON sr_values (instance_id, quantity, id);
DROP INDEX sr_values_instance;

PRAGMA user_version = 17;
