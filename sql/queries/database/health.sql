-- The health object: schema version and counts (store_health_json).
SELECT json_object(
    'status', 'ok',
    'database', 'ok',
    'schema_version', (SELECT user_version FROM pragma_user_version),
    'instances', (SELECT count(*) FROM instances),
    'studies', (SELECT count(DISTINCT study_instance_uid) FROM instances),
    'rejections', (SELECT count(*) FROM rejections),
    'last_received_at', (SELECT max(received_at) FROM instances));
