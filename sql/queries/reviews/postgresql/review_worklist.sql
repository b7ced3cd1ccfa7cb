-- PostgreSQL's review_worklist.sql (docs/postgresql-dialect.md): the
-- same document, built with json_build_object (SQLite's json_object takes any number of mixed
-- arguments, which no PostgreSQL function can); ?1 and ?2 typed where they first
-- appear; IS NOT DISTINCT FROM for SQLite's IS; greatest() for the
-- two-argument max(); subqueries named; each array's order inside its
-- aggregate.
-- GET /api/v1/worklist: the review worklist of one ISO week as one JSON
-- object. ?1 the Monday 'YYYY-MM-DD' of the week: the one asked for, or
-- the default week of every report (report_default_week, src/report/
-- report.h: the last complete week that holds data); ?2 1 when ?1 is
-- that default.
--
-- Findings of the current policy (not superseded) whose day (start, else
-- the exam's first acquisition, else the device period) is in the week,
-- ranked by severity (violation, warning, advisory) then by size (the
-- measured value over its limit). An advisory whose measured value is
-- below its own limit (first-trimester Doppler used below its TI limit)
-- is informational: counted and listed apart. The state of each finding
-- is its newest review, or the newest review of its whole exam if later;
-- "reopened" or none leaves it open. Patterns: a rule's findings of the
-- week concentrated in one shift, room or preset (at least 2 findings,
-- at least 60 % of them there, and a larger share of the findings than
-- that group has of the week's exams). Device-level findings belong to
-- no exam and so to no site: left out when sites are asked for.
-- :site_count, :site_1 ... :site_16: the sites asked for (migration 013;
-- :site_count 0: every site; names not held match nothing).
WITH week AS (
    -- ?1 and ?2 first: a named parameter takes the number after the
    -- highest one seen before it in the text.
    SELECT CAST(?1 AS TEXT) AS monday, CAST(?2 AS INTEGER) AS is_default
),
latest AS (
    SELECT max(day) AS day FROM exam_summaries WHERE day <> ''
      AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
          :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
),
period AS (
    SELECT monday AS first_day, date(monday, '+6 days') AS last_day FROM week
),
week_exams AS (
    SELECT r.* FROM period p
    JOIN exam_period_rows r ON r.day BETWEEN p.first_day AND p.last_day
    -- the summary row's site, looked up only when sites are asked for
    WHERE (:site_count = 0 OR (SELECT x.site FROM exam_summaries x
                               WHERE x.day = r.day
                                 AND x.study_instance_uid = r.study_instance_uid) IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
          :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
),
week_findings AS (
    SELECT f.*, e.day AS day, e.first_acquired_at, e.exam_type_label, e.study_description,
           e.site AS site
    FROM period p
    JOIN exam_summaries e ON e.day BETWEEN p.first_day AND p.last_day AND e.finding_count > 0
         AND (:site_count = 0 OR e.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
             :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
    JOIN findings f ON f.study_instance_uid = e.study_instance_uid AND f.superseded = 0
    UNION ALL
    SELECT f.*, substr(f.period, 1, 10), NULL, NULL, NULL, NULL
    FROM period p
    JOIN findings f ON f.study_instance_uid IS NULL AND f.superseded = 0
    WHERE substr(f.period, 1, 10) BETWEEN p.first_day AND p.last_day AND :site_count = 0
),
described AS (
    SELECT f.*,
        CASE f.severity WHEN 'violation' THEN 3 WHEN 'warning' THEN 2 ELSE 1 END AS severity_rank,
        (f.severity = 'advisory' AND f.measured_value IS NOT NULL AND f.limit_value IS NOT NULL
         AND f.measured_value < f.limit_value) AS informational,
        CASE WHEN f.limit_value > 0 AND f.measured_value IS NOT NULL
             THEN f.measured_value / f.limit_value END AS size,
        CASE
            WHEN f.rule_id = 'equipment_maxima' THEN 'Above the equipment maximum'
            WHEN f.rule_id = 'ti_ceiling' THEN 'Above the TI ceiling'
            WHEN f.rule_id = 'mi_ceiling' THEN 'Above the MI ceiling'
            WHEN f.rule_id LIKE 'dwell%' THEN 'Long time at a high TI'
            WHEN f.rule_id = 'first_trimester_doppler' THEN 'Doppler in the first trimester'
            WHEN f.rule_id = 'output_not_reported' THEN 'No index displayed'
            WHEN f.rule_id = 'thermal_dose' THEN 'Thermal dose'
            WHEN f.rule_id = 'exam_duration' THEN 'Long exam'
            ELSE f.rule_id END AS rule_label,
        CASE
            WHEN f.quantity IN ('mi', 'tis', 'tib', 'tic', 'tis_focus', 'tis_surface')
                THEN upper(replace(f.quantity, '_', ' ')) || ' '
                     || printf('%.1f', f.measured_value)
                     || iif(f.limit_value IS NULL, ' displayed',
                            iif(f.measured_value < f.limit_value,
                                ' displayed, below its limit ',
                                ' displayed, above the limit ')
                            || printf('%.1f', f.limit_value))
            WHEN f.quantity = 'time_at_or_above'
                THEN upper(coalesce(f.governing_index, 'TI')) || ' at or above '
                     || printf('%.1f', f.threshold) || ' for '
                     || printf('%.1f', f.measured_value) || ' min, above the '
                     || printf('%g', f.limit_value) || ' min allowed'
            WHEN f.quantity = 'instances_without_index'
                THEN printf('%d', f.measured_value) || ' image(s) from ' || coalesce(f.room, '?')
                     || ' with ' || coalesce(f.transducer, 'an unnamed transducer')
                     || ' carry no MI or TI: exposure unknown'
            ELSE f.quantity || ' ' || printf('%g', f.measured_value) || coalesce(' ' || f.unit, '')
                 || coalesce(', limit ' || printf('%g', f.limit_value), '')
        END AS reason,
        (SELECT r.id FROM reviews r
         WHERE r.finding_id = f.id
            OR (r.finding_id IS NULL AND r.study_instance_uid = f.study_instance_uid)
         ORDER BY r.id DESC LIMIT 1) AS review_id,
        (SELECT i.operator_name FROM instances i
         WHERE i.study_instance_uid = f.study_instance_uid AND i.operator_name IS NOT NULL
         ORDER BY i.id LIMIT 1) AS operator_name,
        (SELECT i.accession_number FROM instances i
         WHERE i.study_instance_uid = f.study_instance_uid AND i.accession_number IS NOT NULL
         ORDER BY i.id LIMIT 1) AS accession_number
    FROM week_findings f
),
rows AS (
    SELECT d.*, r.outcome, r.reviewer, r.reviewed_at, r.comment,
           (r.id IS NULL OR r.outcome = 'reopened') AS open
    FROM described d LEFT JOIN reviews r ON r.id = d.review_id
),
documents AS (
    SELECT informational, severity_rank, size, id, json_build_object(
        'id', id, 'study_instance_uid', study_instance_uid, 'rule_id', rule_id,
        'rule_label', rule_label, 'severity', severity, 'reason', reason,
        'measured_value', measured_value, 'limit_value', limit_value, 'unit', unit,
        'size', size, 'quantity', quantity, 'governing_index', governing_index,
        'day', day, 'first_acquired_at', first_acquired_at,
        'exam_type_label', exam_type_label, 'study_description', study_description,
        'room', room, 'preset', preset, 'shift', shift, 'transducer', transducer,
        'operator_name', operator_name, 'accession_number', accession_number,
        'site', site,
        'open', json(iif(open, 'true', 'false')),
        'review', iif(review_id IS NULL, NULL, json_build_object(
            'outcome', outcome, 'reviewer', reviewer, 'reviewed_at', reviewed_at,
            'comment', comment))) AS document,
        open, severity, rule_id, rule_label, shift, room, preset
    FROM rows
),
patterns AS (
    SELECT rule_id, rule_label, dimension, key, finding_count, rule_total,
           severity, group_exams, week_exams
    FROM (
        SELECT g.*, row_number() OVER (PARTITION BY g.rule_id ORDER BY
                 g.finding_count * 1.0 / g.rule_total DESC, g.finding_count DESC) AS place
        FROM (
            SELECT d.rule_id, max(d.rule_label) AS rule_label, 'shift' AS dimension,
                   d.shift AS key, count(*) AS finding_count,
                   (SELECT count(*) FROM documents t WHERE t.rule_id = d.rule_id
                                                     AND NOT t.informational) AS rule_total,
                   CASE max(d.severity_rank) WHEN 3 THEN 'violation' WHEN 2 THEN 'warning'
                                             ELSE 'advisory' END AS severity,
                   (SELECT count(*) FROM week_exams x WHERE x.shift IS NOT DISTINCT FROM d.shift) AS group_exams,
                   (SELECT count(*) FROM week_exams) AS week_exams
            FROM documents d WHERE NOT d.informational AND d.shift IS NOT NULL
            GROUP BY d.rule_id, d.shift
            UNION ALL
            SELECT d.rule_id, max(d.rule_label), 'room', d.room, count(*),
                   (SELECT count(*) FROM documents t WHERE t.rule_id = d.rule_id
                                                     AND NOT t.informational),
                   CASE max(d.severity_rank) WHEN 3 THEN 'violation' WHEN 2 THEN 'warning'
                                             ELSE 'advisory' END,
                   (SELECT count(*) FROM week_exams x WHERE x.room IS NOT DISTINCT FROM d.room),
                   (SELECT count(*) FROM week_exams)
            FROM documents d WHERE NOT d.informational AND d.room IS NOT NULL
            GROUP BY d.rule_id, d.room
            UNION ALL
            SELECT d.rule_id, max(d.rule_label), 'preset', d.preset, count(*),
                   (SELECT count(*) FROM documents t WHERE t.rule_id = d.rule_id
                                                     AND NOT t.informational),
                   CASE max(d.severity_rank) WHEN 3 THEN 'violation' WHEN 2 THEN 'warning'
                                             ELSE 'advisory' END,
                   (SELECT count(*) FROM week_exams x WHERE x.preset IS NOT DISTINCT FROM d.preset),
                   (SELECT count(*) FROM week_exams)
            FROM documents d WHERE NOT d.informational AND d.preset IS NOT NULL
            GROUP BY d.rule_id, d.preset
        ) g
        WHERE g.finding_count >= 2 AND g.finding_count * 1.0 / g.rule_total >= 0.6
          AND g.finding_count * 1.0 / g.rule_total
              > g.group_exams * 1.0 / greatest(g.week_exams, 1)
    ) AS ranked WHERE place = 1
)
SELECT json_build_object(
    'week', strftime('%Y', date((SELECT monday FROM week), '+3 days')) || '-W'
            || printf('%02d', (CAST(strftime('%j', date((SELECT monday FROM week), '+3 days'))
                                    AS INTEGER) + 6) / 7),
    'from', (SELECT first_day FROM period), 'to', (SELECT last_day FROM period),
    'default_week', json(iif((SELECT is_default FROM week), 'true', 'false')),
    'data_first_day', (SELECT min(day) FROM exam_summaries WHERE day <> ''
                         AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                             :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))),
    'data_last_day', (SELECT day FROM latest),
    'weeks_with_data', (SELECT json_group_array(monday ORDER BY monday) FROM (
        -- the Monday on or before each day, as date(day, '-6 days', 'weekday 1')
        SELECT DISTINCT to_char(date_trunc('week', CAST(day AS date)), 'YYYY-MM-DD') AS monday
        FROM exam_summaries
        WHERE day <> '' AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
            :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
        ) AS mondays),
    'exam_count', (SELECT count(*) FROM week_exams),
    'counts', json_build_object(
        'violation', (SELECT count(*) FROM documents WHERE severity = 'violation'),
        'warning', (SELECT count(*) FROM documents WHERE severity = 'warning'),
        'advisory', (SELECT count(*) FROM documents WHERE severity = 'advisory'
                                                       AND NOT informational),
        'informational', (SELECT count(*) FROM documents WHERE informational),
        'open', (SELECT count(*) FROM documents WHERE open AND NOT informational)),
    'findings', (SELECT coalesce(json_group_array(json(document)
                                                  ORDER BY severity_rank DESC, size IS NULL,
                                                           size DESC, id), '[]')
        FROM documents WHERE NOT informational),
    'informational', (SELECT coalesce(json_group_array(json(document) ORDER BY id), '[]')
        FROM documents WHERE informational),
    'informational_by_rule', (SELECT coalesce(json_group_array(json_build_object(
        'rule_id', rule_id, 'rule_label', rule_label, 'count', n) ORDER BY n DESC, rule_id),
        '[]') FROM (
        SELECT rule_id, max(rule_label) AS rule_label, count(*) AS n FROM documents
        WHERE informational GROUP BY rule_id) AS by_rule),
    'patterns', (SELECT coalesce(json_group_array(json_build_object(
        'rule_id', rule_id, 'rule_label', rule_label, 'dimension', dimension, 'key', key,
        'finding_count', finding_count, 'rule_total', rule_total, 'severity', severity,
        'group_exams', group_exams, 'week_exams', week_exams)
        ORDER BY CASE severity WHEN 'violation' THEN 3 WHEN 'warning' THEN 2 ELSE 1 END DESC,
                 finding_count DESC, rule_id, dimension, key), '[]')
        FROM patterns));
