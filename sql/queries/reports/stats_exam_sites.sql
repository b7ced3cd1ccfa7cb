-- The site of each exam of a period (store_load_exam_rows with
-- STORE_EXAM_SITE): the exams of stats_exam_rows.sql (day ?1 to ?2
-- inclusive; the same sites asked for, :site_count, :site_1 ...
-- :site_16) with the site of their summary row, the site of their first
-- instance (migration 013). Read apart, and only when asked for, so that
-- the period's rows cost what they did; unordered, the store puts each on
-- its exam's row.
SELECT study_instance_uid, site
FROM exam_summaries
WHERE day >= ?1 AND day <= ?2
  AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
      :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16));
