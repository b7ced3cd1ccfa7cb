-- GET /metrics on PostgreSQL: the size of the connected database in bytes
-- (pg_database_size, PostgreSQL documentation "Database Object
-- Management Functions"). An override because the common file counts
-- SQLite's pages with its pragma functions, which PostgreSQL lacks.
SELECT pg_database_size(current_database());
