-- The days that actually hold exams in a weekly report's baseline
-- (store_load_baseline_span): first and last exam day at or after ?1 and
-- before ?2 ('YYYY-MM-DD'), the number of ISO weeks among them that hold
-- exams, and the exams. A baseline asked for 12 weeks may hold fewer.
SELECT min(day), max(day),
       count(DISTINCT date(day, '-6 days', 'weekday 1')), count(*)
FROM exam_summaries
WHERE day <> '' AND day >= ?1 AND day < ?2;
