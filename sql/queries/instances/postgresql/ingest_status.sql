-- PostgreSQL's ingest_status.sql (docs/postgresql-dialect.md): the same
-- document, built with json_build_object (SQLite's json_object takes any
-- number of mixed arguments, which no PostgreSQL function can); ?1 and ?2
-- typed as integers where they first appear (they are numbers in the
-- document); the finding's instance UIDs read with
-- json_array_elements_text (SQLite's json_each has other columns); IS NOT
-- DISTINCT FROM for SQLite's IS; the grouped rows filtered outside (no
-- output names in HAVING); each array's order inside its aggregate, NULLs
-- first as SQLite sorts them; the station names of a profile in name order
-- (SQLite's DISTINCT keeps the order the rows came in, which it does not
-- define).
-- The ingest status document (store_ingest_json, GET /api/v1/ingest).
-- ?1: window in hours (objects per hour, device activity); received_at is
-- UTC. A device (calling AE title and Station Name) is "silent" when it
-- has sent nothing for ?2 hours although it sent before. not_reporting:
-- per room and transducer, image objects of the last ?3 days of data
-- (by acquisition day) that carried no index at all, neither in the header
-- nor read from the screen (migration 007); first_without_at is when the
-- current run without indices began, looked for over all the data, not
-- only those days: the first exam of that room and transducer without any
-- index after its last exam with one. reading: the pixel reading queue and
-- the states of the readings.
WITH now AS (
    SELECT strftime('%Y-%m-%dT%H:%M:%SZ', 'now') AS at,
           strftime('%Y-%m-%dT%H:%M:%SZ', 'now', printf('-%d hours', CAST(?1 AS INTEGER)))
               AS window_start,
           strftime('%Y-%m-%dT%H:%M:%SZ', 'now', printf('-%d hours', CAST(?2 AS INTEGER)))
               AS silent_before
),
hours AS (
    SELECT substr(received_at, 1, 13) AS hour, count(*) AS objects,
           sum(iif(object_kind IN ('image', 'multiframe', 'volume')
                   AND mi IS NULL AND tis IS NULL AND tib IS NULL AND tic IS NULL
                   AND NOT EXISTS (SELECT 1 FROM screen_readings r WHERE r.instance_id = instances.id
                                   AND (r.mi IS NOT NULL OR r.tis IS NOT NULL OR r.tib IS NOT NULL
                                        OR r.tic IS NOT NULL)), 1, 0))
               AS without_indices
    FROM instances WHERE received_at >= (SELECT window_start FROM now)
    GROUP BY 1 ORDER BY 1
),
devices AS (
    SELECT coalesce(nullif(calling_ae_title, ''), '(import)') AS calling_ae_title,
           station_name, max(room) AS room, count(*) AS objects,
           sum(iif(received_at >= (SELECT window_start FROM now), 1, 0)) AS objects_in_window,
           max(received_at) AS last_received_at
    FROM instances GROUP BY 1, 2 ORDER BY 1, 2
),
last_day AS (
    SELECT max(substr(acquired_at, 1, 10)) AS day FROM instances
),
recent_not_reporting AS (
    SELECT * FROM (
    SELECT room, transducer_data AS transducer, count(*) AS instances,
           sum(iif(mi IS NULL AND tis IS NULL AND tib IS NULL AND tic IS NULL
                   AND NOT EXISTS (SELECT 1 FROM screen_readings r WHERE r.instance_id = instances.id
                                   AND (r.mi IS NOT NULL OR r.tis IS NOT NULL OR r.tib IS NOT NULL
                                        OR r.tic IS NOT NULL)), 1, 0))
               AS without_indices,
           min(iif(mi IS NULL AND tis IS NULL AND tib IS NULL AND tic IS NULL
                   AND NOT EXISTS (SELECT 1 FROM screen_readings r WHERE r.instance_id = instances.id
                                   AND (r.mi IS NOT NULL OR r.tis IS NOT NULL OR r.tib IS NOT NULL
                                        OR r.tic IS NOT NULL)),
                   acquired_at, NULL)) AS first_recent_without_at
    FROM instances
    WHERE object_kind IN ('image', 'multiframe', 'volume')
      AND substr(acquired_at, 1, 10) >= date((SELECT day FROM last_day), printf('-%d days', ?3 - 1))
    GROUP BY 1, 2) AS grouped
    WHERE without_indices > 0
),
not_reporting AS (
    SELECT r.room, r.transducer, r.instances, r.without_indices,
           coalesce((SELECT min(e.first_acquired_at) FROM exam_period_rows e
                     WHERE e.room IS NOT DISTINCT FROM r.room
                       AND e.transducer IS NOT DISTINCT FROM r.transducer
                       AND e.indexed_count = 0 AND e.first_acquired_at > coalesce(
                           (SELECT max(w.first_acquired_at) FROM exam_period_rows w
                            WHERE w.room IS NOT DISTINCT FROM r.room
                              AND w.transducer IS NOT DISTINCT FROM r.transducer
                              AND w.indexed_count > 0), '')),
                    r.first_recent_without_at) AS first_without_at
    FROM recent_not_reporting r
    ORDER BY r.without_indices DESC, 1, 2
)
SELECT json_build_object(
    'generated_at', (SELECT at FROM now),
    'window_hours', ?1,
    'silent_after_hours', ?2,
    'not_reporting_days', ?3,
    'totals', json_build_object(
        'instances', (SELECT count(*) FROM instances),
        'studies', (SELECT count(*) FROM exams),
        'rejections', (SELECT count(*) FROM rejections),
        'quarantined', (SELECT count(*) FROM rejections WHERE quarantine_path <> ''),
        -- re-sent objects (same SOP Instance UID) replace their row: how
        -- many rows were replaced, and how many times in all
        'replaced_instances', (SELECT count(*) FROM instances WHERE replaced_count > 0),
        'replacements', (SELECT coalesce(sum(replaced_count), 0) FROM instances),
        'last_received_at', (SELECT max(received_at) FROM instances)),
    'reading', json_build_object(
        'queued', (SELECT count(*) FROM reading_queue),
        'queued_bytes', (SELECT coalesce(sum(bytes), 0) FROM reading_queue),
        'read', (SELECT count(*) FROM screen_readings WHERE state = 'read'),
        'not_read', (SELECT count(*) FROM screen_readings WHERE state = 'not_read'),
        'not_read_queue_full', (SELECT count(*) FROM screen_readings
                                WHERE state = 'not_read' AND reason LIKE 'reading queue full%'),
        -- per device (its screen profile): captures whose header and screen
        -- disagree (current header_screen_mismatch findings, docs/policy.md)
        'header_screen_mismatch_by_device', (SELECT json_group_array(json_build_object(
                'profile_key', profile_key, 'station_names', json(stations),
                'captures', captures, 'findings', findings)
                ORDER BY captures DESC, profile_key NULLS FIRST)
            FROM (SELECT r.profile_key, count(DISTINCT i.id) AS captures,
                         count(*) AS findings,
                         json_group_array(DISTINCT i.station_name
                                          ORDER BY i.station_name NULLS FIRST) AS stations
                  FROM findings f
                  CROSS JOIN LATERAL json_array_elements_text(f.instance_uids::json) AS u(value)
                  JOIN instances i ON i.sop_instance_uid = u.value
                  JOIN screen_readings r ON r.instance_id = i.id
                  WHERE f.rule_id = 'header_screen_mismatch' AND f.superseded = 0
                  GROUP BY r.profile_key) AS mismatches)),
    'objects_per_hour', (SELECT json_group_array(json_build_object(
        'hour', hour || ':00Z', 'objects', objects, 'without_indices', without_indices)
        ORDER BY hour) FROM hours),
    'rejections_by_reason', (SELECT json_group_array(json_build_object('reason', reason, 'count', n)
                                                     ORDER BY n DESC, reason)
        FROM (SELECT reason, count(*) AS n FROM rejections GROUP BY reason
              ORDER BY n DESC, reason LIMIT 50) AS reasons),
    'rejections_recent', (SELECT json_group_array(json_build_object(
        'received_at', received_at, 'calling_ae_title', calling_ae_title,
        'sop_class_uid', sop_class_uid, 'reason', reason,
        'quarantined', json(iif(quarantine_path <> '', 'true', 'false')))
        ORDER BY received_at DESC, id DESC)
        FROM (SELECT * FROM rejections ORDER BY received_at DESC, id DESC LIMIT 50) AS recent),
    'devices', (SELECT json_group_array(json_build_object(
        'calling_ae_title', calling_ae_title, 'station_name', station_name, 'room', room,
        'objects', objects, 'objects_in_window', objects_in_window,
        'last_received_at', last_received_at,
        'silent', json(iif(last_received_at < (SELECT silent_before FROM now), 'true', 'false')))
        ORDER BY calling_ae_title, station_name NULLS FIRST)
        FROM devices),
    'not_reporting', (SELECT json_group_array(json_build_object(
        'room', room, 'transducer', transducer, 'instances', instances,
        'without_indices', without_indices, 'first_without_at', first_without_at)
        ORDER BY without_indices DESC, room NULLS FIRST, transducer NULLS FIRST)
        FROM not_reporting));
