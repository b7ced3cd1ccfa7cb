-- A weekly report's baseline (store_load_exam_governing): the exam type and
-- the highest governing TI of each exam whose day (as in stats_exam_rows.sql)
-- is at or after ?1 and before ?2 ('YYYY-MM-DD'). No order: the values are
-- sorted by the computation.
-- :site_count, :site_1 ... :site_16: the sites asked for (migration 013;
-- :site_count 0: every site; names not held match nothing).
SELECT s.exam_type, s.max_governing
FROM exam_summaries s
WHERE s.day >= ?1 AND s.day < ?2
  AND (:site_count = 0 OR s.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
      :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16));
