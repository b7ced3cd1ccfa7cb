-- deploy/postgresql/setup.sql - the role and database mitilog's receivers
-- share, and the role a replica streams with (docs/storage.md). Run once on
-- the PostgreSQL server as its superuser:
--     sudo -u postgres psql -v ON_ERROR_STOP=1 -f setup.sql
-- then give both roles a password with psql's \password (never in a file
-- of the repository). The first receiver that starts creates the tables.
CREATE ROLE mitilog LOGIN;
CREATE DATABASE mitilog OWNER mitilog ENCODING 'UTF8' LC_COLLATE 'C.UTF-8'
    LC_CTYPE 'C.UTF-8' TEMPLATE template0;
-- Streaming replication to the dashboard's read-only replica and the base
-- backups (pg_basebackup) connect as this role.
CREATE ROLE replicator REPLICATION LOGIN;
