-- What statistics use of the exams of a period (store_load_exam_rows
-- without identity or detail columns): the exams of stats_exam_rows.sql
-- (period ?1, ?2; same values, same order) with only the exam type and the
-- grouping key ?3 ('room', 'preset', 'shift', 'transducer', 'site'; NULL for the
-- exam type), so that a long period returns short rows. Unordered, like
-- stats_exam_rows.sql: the store sorts by the Study Instance UID.
-- informational: the exam's findings that are advisories below their own
-- limit (first-trimester Doppler used below its TI limit), counted apart
-- from "with findings" as the worklist lists them apart
-- (queries/reviews/review_worklist.sql).
-- :site_count, :site_1 ... :site_16: the sites asked for (migration 013;
-- :site_count 0: every site; names not held match nothing).
SELECT exam_period_rows.exam_type,
       CASE ?3 WHEN 'room' THEN room WHEN 'preset' THEN preset WHEN 'shift' THEN shift
               WHEN 'transducer' THEN transducer WHEN 'site' THEN x.site END,
       exam_period_rows.max_governing, exam_period_rows.max_mi,
       exam_period_rows.estimated_seconds, exam_period_rows.captures,
       exam_period_rows.indexed_count, exam_period_rows.finding_count,
       exam_period_rows.study_instance_uid,
       CASE WHEN exam_period_rows.finding_count > 0 THEN
           (SELECT count(*) FROM findings f
            WHERE f.study_instance_uid = exam_period_rows.study_instance_uid
              AND f.superseded = 0 AND f.severity = 'advisory'
              AND f.measured_value < f.limit_value)
       ELSE 0 END
FROM exam_period_rows
JOIN exam_summaries x ON x.day = exam_period_rows.day
     AND x.study_instance_uid = exam_period_rows.study_instance_uid
WHERE exam_period_rows.day >= ?1 AND exam_period_rows.day <= ?2
  AND (:site_count = 0 OR x.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
      :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16));
