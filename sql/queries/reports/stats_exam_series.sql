-- What drift uses of the exams of a period (store_load_exam_rows with the
-- day, room and preset only): the exams of stats_exam_rows.sql (period ?1,
-- ?2, inclusive; same values) with exam type, day, room, preset, the
-- highest governing TI, the capture and indexed counts and the Study
-- Instance UID, so that 24 weeks return short rows and none of the
-- estimated seconds or dwell sums are computed. Unordered, like
-- stats_exam_rows.sql: the store sorts by the Study Instance UID.
-- :site_count, :site_1 ... :site_16: the sites asked for (migration 013;
-- :site_count 0: every site; names not held match nothing).
SELECT exam_period_rows.exam_type, exam_period_rows.day, room, preset,
       exam_period_rows.max_governing, exam_period_rows.captures,
       exam_period_rows.indexed_count, exam_period_rows.study_instance_uid
FROM exam_period_rows
JOIN exam_summaries x ON x.day = exam_period_rows.day
     AND x.study_instance_uid = exam_period_rows.study_instance_uid
WHERE exam_period_rows.day >= ?1 AND exam_period_rows.day <= ?2
  AND (:site_count = 0 OR x.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
      :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16));
