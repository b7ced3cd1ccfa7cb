-- The first and last exam day held (store_load_day_range): the date part
-- of the least and greatest first acquisition (exams_first_acquired; the
-- date part is monotonic in the text), NULL when no exam has one.
-- With sites asked for, the least and greatest day of their exams.
-- :site_count, :site_1 ... :site_16: the sites asked for (migration 013;
-- :site_count 0: every site; names not held match nothing).
SELECT CASE WHEN :site_count = 0
            THEN substr((SELECT min(first_acquired_at) FROM exams), 1, 10)
            ELSE (SELECT min(day) FROM exam_summaries WHERE day <> ''
                    AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                        :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))) END,
       CASE WHEN :site_count = 0
            THEN substr((SELECT max(first_acquired_at) FROM exams), 1, 10)
            ELSE (SELECT max(day) FROM exam_summaries WHERE day <> ''
                    AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                        :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))) END;
