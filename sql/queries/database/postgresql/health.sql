-- PostgreSQL's health.sql (docs/postgresql-dialect.md): the same object,
-- built with json_build_object, the schema version read from
-- schema_version (SQLite keeps it in PRAGMA user_version).
SELECT json_build_object(
    'status', 'ok',
    'database', 'ok',
    'schema_version', (SELECT coalesce(max(version), 0) FROM schema_version),
    'instances', (SELECT count(*) FROM instances),
    'studies', (SELECT count(DISTINCT study_instance_uid) FROM instances),
    'rejections', (SELECT count(*) FROM rejections),
    'last_received_at', (SELECT max(received_at) FROM instances));
