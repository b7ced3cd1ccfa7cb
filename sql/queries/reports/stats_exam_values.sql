-- What statistics use of the exams of a period (store_load_exam_rows
-- without identity or detail columns): the exams of stats_exam_rows.sql
-- (period ?1, ?2; same values, same order) with only the exam type and the
-- grouping key ?3 ('room', 'preset', 'shift', 'transducer'; NULL for the
-- exam type), so that a long period returns short rows. Unordered, like
-- stats_exam_rows.sql: the store sorts by the Study Instance UID.
-- informational: the exam's findings that are advisories below their own
-- limit (first-trimester Doppler used below its TI limit), counted apart
-- from "with findings" as the worklist lists them apart
-- (queries/reviews/review_worklist.sql).
SELECT exam_type,
       CASE ?3 WHEN 'room' THEN room WHEN 'preset' THEN preset WHEN 'shift' THEN shift
               WHEN 'transducer' THEN transducer END,
       max_governing, max_mi, estimated_seconds, captures,
       indexed_count, finding_count, study_instance_uid,
       CASE WHEN finding_count > 0 THEN
           (SELECT count(*) FROM findings f
            WHERE f.study_instance_uid = exam_period_rows.study_instance_uid
              AND f.superseded = 0 AND f.severity = 'advisory'
              AND f.measured_value < f.limit_value)
       ELSE 0 END
FROM exam_period_rows
WHERE day >= ?1 AND day <= ?2;
