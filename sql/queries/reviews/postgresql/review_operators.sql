-- PostgreSQL's review_operators.sql (docs/postgresql-dialect.md): the
-- same document, built with json_build_object (SQLite's json_object takes any number of mixed
-- arguments, which no PostgreSQL function can); exams with findings counted by CASE
-- (PostgreSQL does not sum booleans); the median grouped by (SQLite takes
-- a bare column); the operators' order inside the aggregate.
-- GET /api/v1/operators: per operator, the exams of a period for the
-- lead's coaching. ?1 from, ?2 to ('YYYY-MM-DD', inclusive, on the exam
-- day; NULL: open). An exam's operator is the first Operators' Name
-- stored for it (only when the site records operators: [extraction]
-- record_operator). Per operator: exams, exams with a governing-index
-- value, the median of the exams' maximum governing index (over those
-- with a value; the middle value, or the mean of the two middle ones),
-- exams with findings and findings, informational advisories (measured
-- below their own limit) left out as on the worklist.
-- :site_count, :site_1 ... :site_16: the sites asked for (migration 013;
-- :site_count 0: every site; names not held match nothing).
WITH exams AS (
    SELECT r.study_instance_uid, r.max_governing,
           (SELECT i.operator_name FROM instances i
            WHERE i.study_instance_uid = r.study_instance_uid AND i.operator_name IS NOT NULL
            ORDER BY i.id LIMIT 1) AS operator,
           (SELECT count(*) FROM findings f
            WHERE f.study_instance_uid = r.study_instance_uid AND f.superseded = 0
              AND NOT (f.severity = 'advisory' AND f.measured_value IS NOT NULL
                       AND f.limit_value IS NOT NULL
                       AND f.measured_value < f.limit_value)) AS findings
    FROM exam_period_rows r
    WHERE r.day <> '' AND (CAST(?1 AS TEXT) IS NULL OR r.day >= ?1) AND (CAST(?2 AS TEXT) IS NULL OR r.day <= ?2)
      -- the summary row's site, looked up only when sites are asked for
      AND (:site_count = 0 OR (SELECT x.site FROM exam_summaries x
                               WHERE x.day = r.day
                                 AND x.study_instance_uid = r.study_instance_uid) IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
          :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
),
named AS (
    SELECT * FROM exams WHERE operator IS NOT NULL
),
ranked AS (
    SELECT operator, max_governing,
           row_number() OVER (PARTITION BY operator ORDER BY max_governing) AS place,
           count(*) OVER (PARTITION BY operator) AS valued
    FROM named WHERE max_governing IS NOT NULL
),
medians AS (
    SELECT operator, avg(max_governing) AS median FROM ranked
    WHERE place IN ((valued + 1) / 2, (valued + 2) / 2)
    GROUP BY operator
)
SELECT json_build_object(
    'from', ?1, 'to', ?2,
    'exam_count', (SELECT count(*) FROM exams),
    'exams_with_operator', (SELECT count(*) FROM named),
    'recorded', json(iif((SELECT count(*) FROM named) > 0, 'true', 'false')),
    'operators', (SELECT coalesce(json_group_array(json_build_object(
        'operator', operator, 'exam_count', exam_count, 'valued_count', valued_count,
        'median_governing', median, 'exams_with_findings', exams_with_findings,
        'finding_count', finding_count) ORDER BY operator), '[]') FROM (
        SELECT n.operator, count(*) AS exam_count, count(n.max_governing) AS valued_count,
               m.median, sum(CASE WHEN n.findings > 0 THEN 1 ELSE 0 END) AS exams_with_findings,
               sum(n.findings) AS finding_count
        FROM named n LEFT JOIN medians m ON m.operator = n.operator
        GROUP BY n.operator, m.median) AS per_operator));
