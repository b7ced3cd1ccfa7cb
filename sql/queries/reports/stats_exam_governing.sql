-- A weekly report's baseline (store_load_exam_governing): the exam type and
-- the highest governing TI of each exam whose day (as in stats_exam_rows.sql)
-- is at or after ?1 and before ?2 ('YYYY-MM-DD'). No order: the values are
-- sorted by the computation.
SELECT s.exam_type, s.max_governing
FROM exam_summaries s
WHERE s.day >= ?1 AND s.day < ?2;
