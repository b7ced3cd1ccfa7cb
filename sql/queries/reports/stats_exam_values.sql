-- What statistics use of the exams of a period (store_load_exam_rows
-- without identity or detail columns): the exams of stats_exam_rows.sql
-- (period ?1, ?2; same values, same order) with only the exam type and the
-- grouping key ?3 ('room', 'preset', 'shift', 'transducer'; NULL for the
-- exam type), so that a long period returns short rows. Unordered, like
-- stats_exam_rows.sql: the store sorts by the Study Instance UID.
SELECT exam_type,
       CASE ?3 WHEN 'room' THEN room WHEN 'preset' THEN preset WHEN 'shift' THEN shift
               WHEN 'transducer' THEN transducer END,
       max_governing, max_mi, estimated_seconds, captures,
       indexed_count, finding_count, study_instance_uid
FROM exam_period_rows
WHERE day >= ?1 AND day <= ?2;
