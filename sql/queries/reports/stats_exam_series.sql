-- What drift uses of the exams of a period (store_load_exam_rows with the
-- day, room and preset only): the exams of stats_exam_rows.sql (period ?1,
-- ?2, inclusive; same values) with exam type, day, room, preset, the
-- highest governing TI, the capture and indexed counts and the Study
-- Instance UID, so that 24 weeks return short rows and none of the
-- estimated seconds or dwell sums are computed. Unordered, like
-- stats_exam_rows.sql: the store sorts by the Study Instance UID.
SELECT exam_type, day, room, preset, max_governing, captures, indexed_count,
       study_instance_uid
FROM exam_period_rows
WHERE day >= ?1 AND day <= ?2;
