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
-- Sites (migration 013): :site_count, :site_1 ... :site_16 limit the
-- instances, exams and rejections counted to the sites asked for
-- (:site_count 0: every site); sites lists every site held, unfiltered
-- (instances, studies, rejections, last receipt), for the site selector;
-- exam_jobs is the depth of the exam rebuild queue (waiting, taken).
WITH now AS (
    SELECT strftime('%Y-%m-%dT%H:%M:%SZ', 'now') AS at,
           strftime('%Y-%m-%dT%H:%M:%SZ', 'now', printf('-%d hours', ?1)) AS window_start,
           strftime('%Y-%m-%dT%H:%M:%SZ', 'now', printf('-%d hours', ?2)) AS silent_before,
           -- ?3 here too: every ?N is seen before the named :site_count
           ?3 AS not_reporting_days
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
      AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
          :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
    GROUP BY 1 ORDER BY 1
),
devices AS (
    SELECT coalesce(nullif(calling_ae_title, ''), '(import)') AS calling_ae_title,
           station_name, max(room) AS room, count(*) AS objects,
           sum(iif(received_at >= (SELECT window_start FROM now), 1, 0)) AS objects_in_window,
           max(received_at) AS last_received_at
    FROM instances
    WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
        :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
    GROUP BY 1, 2 ORDER BY 1, 2
),
last_day AS (
    SELECT max(substr(acquired_at, 1, 10)) AS day FROM instances
    WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
        :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
),
recent_not_reporting AS (
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
      AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
          :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
      AND substr(acquired_at, 1, 10) >= date((SELECT day FROM last_day), printf('-%d days', ?3 - 1))
    GROUP BY 1, 2
    HAVING without_indices > 0
),
not_reporting AS (
    SELECT r.room, r.transducer, r.instances, r.without_indices,
           coalesce((SELECT min(e.first_acquired_at) FROM exam_period_rows e
                     WHERE e.room IS r.room AND e.transducer IS r.transducer
                       AND e.indexed_count = 0 AND e.first_acquired_at > coalesce(
                           (SELECT max(w.first_acquired_at) FROM exam_period_rows w
                            WHERE w.room IS r.room AND w.transducer IS r.transducer
                              AND w.indexed_count > 0), '')),
                    r.first_recent_without_at) AS first_without_at
    FROM recent_not_reporting r
    ORDER BY r.without_indices DESC, 1, 2
)
SELECT json_object(
    'generated_at', (SELECT at FROM now),
    'window_hours', ?1,
    'silent_after_hours', ?2,
    'not_reporting_days', ?3,
    'totals', json_object(
        'instances', (SELECT count(*) FROM instances
                      WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                          :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))),
        'studies', CASE WHEN :site_count = 0 THEN (SELECT count(*) FROM exams)
                   ELSE (SELECT count(*) FROM exam_summaries
                         WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                             :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))) END,
        'rejections', (SELECT count(*) FROM rejections
                       WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                           :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))),
        'quarantined', (SELECT count(*) FROM rejections WHERE quarantine_path <> ''
                        AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                            :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))),
        -- re-sent objects (same SOP Instance UID) replace their row: how
        -- many rows were replaced, and how many times in all
        'replaced_instances', (SELECT count(*) FROM instances WHERE replaced_count > 0
                               AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                                   :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))),
        'replacements', (SELECT coalesce(sum(replaced_count), 0) FROM instances
                         WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                             :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))),
        'last_received_at', (SELECT max(received_at) FROM instances
                             WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                                 :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16)))),
    'sites', (SELECT coalesce(json_group_array(json_object(
        'site', site, 'instances', instances, 'studies', studies, 'rejections', rejections,
        'last_received_at', last_received_at)), '[]') FROM (
        SELECT n.site,
               (SELECT count(*) FROM instances i WHERE i.site = n.site) AS instances,
               (SELECT count(*) FROM exam_summaries x WHERE x.site = n.site) AS studies,
               (SELECT count(*) FROM rejections j WHERE j.site = n.site) AS rejections,
               (SELECT max(i.received_at) FROM instances i WHERE i.site = n.site)
                   AS last_received_at
        FROM (SELECT DISTINCT site FROM instances UNION SELECT DISTINCT site FROM rejections) n
        ORDER BY n.site)),
    'exam_jobs', json_object(
        'waiting', (SELECT count(*) FROM exam_jobs WHERE taken_by IS NULL),
        'taken', (SELECT count(*) FROM exam_jobs WHERE taken_by IS NOT NULL)),
    'reading', json_object(
        'queued', (SELECT count(*) FROM reading_queue),
        'queued_bytes', (SELECT coalesce(sum(bytes), 0) FROM reading_queue),
        'read', (SELECT count(*) FROM screen_readings WHERE state = 'read'),
        'not_read', (SELECT count(*) FROM screen_readings WHERE state = 'not_read'),
        'not_read_queue_full', (SELECT count(*) FROM screen_readings
                                WHERE state = 'not_read' AND reason LIKE 'reading queue full%'),
        -- per device (its screen profile): captures whose header and screen
        -- disagree (current header_screen_mismatch findings, docs/policy.md)
        'header_screen_mismatch_by_device', (SELECT json_group_array(json_object(
                'profile_key', profile_key, 'station_names', json(stations),
                'captures', captures, 'findings', findings))
            FROM (SELECT r.profile_key, count(DISTINCT i.id) AS captures,
                         count(*) AS findings,
                         json_group_array(DISTINCT i.station_name) AS stations
                  FROM findings f, json_each(f.instance_uids) u
                  JOIN instances i ON i.sop_instance_uid = u.value
                  JOIN screen_readings r ON r.instance_id = i.id
                  WHERE f.rule_id = 'header_screen_mismatch' AND f.superseded = 0
                  GROUP BY r.profile_key ORDER BY captures DESC, r.profile_key))),
    'objects_per_hour', (SELECT json_group_array(json_object(
        'hour', hour || ':00Z', 'objects', objects, 'without_indices', without_indices))
        FROM hours),
    'rejections_by_reason', (SELECT json_group_array(json_object('reason', reason, 'count', n))
        FROM (SELECT reason, count(*) AS n FROM rejections
              WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                  :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
              GROUP BY reason
              ORDER BY n DESC, reason LIMIT 50)),
    'rejections_recent', (SELECT json_group_array(json_object(
        'received_at', received_at, 'calling_ae_title', calling_ae_title,
        'sop_class_uid', sop_class_uid, 'reason', reason, 'site', site,
        'quarantined', json(iif(quarantine_path <> '', 'true', 'false'))))
        FROM (SELECT * FROM rejections
              WHERE (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                  :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
              ORDER BY received_at DESC, id DESC LIMIT 50)),
    'devices', (SELECT json_group_array(json_object(
        'calling_ae_title', calling_ae_title, 'station_name', station_name, 'room', room,
        'objects', objects, 'objects_in_window', objects_in_window,
        'last_received_at', last_received_at,
        'silent', json(iif(last_received_at < (SELECT silent_before FROM now), 'true', 'false'))))
        FROM devices),
    'not_reporting', (SELECT json_group_array(json_object(
        'room', room, 'transducer', transducer, 'instances', instances,
        'without_indices', without_indices, 'first_without_at', first_without_at))
        FROM not_reporting));
