-- GET /metrics on PostgreSQL: the size of the connected database in bytes
-- (pg_database_size, PostgreSQL documentation "Database Object
-- Management Functions").
SELECT pg_database_size(current_database());
