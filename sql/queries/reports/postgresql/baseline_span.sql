-- PostgreSQL's baseline_span.sql (docs/postgresql-dialect.md): the ISO
-- weeks counted by date_trunc('week'), the Monday on or before the day as
-- SQLite's date(day, '-6 days', 'weekday 1') gives it, without a call of
-- the compatibility date() on every exam of the baseline.
-- The days that actually hold exams in a weekly report's baseline
-- (store_load_baseline_span): first and last exam day at or after ?1 and
-- before ?2 ('YYYY-MM-DD'), the number of ISO weeks among them that hold
-- exams, and the exams. A baseline asked for 12 weeks may hold fewer.
-- :site_count, :site_1 ... :site_16: the sites asked for (migration 013;
-- :site_count 0: every site; names not held match nothing).
SELECT min(day), max(day),
       count(DISTINCT date_trunc('week', CAST(day AS date))), count(*)
FROM exam_summaries
WHERE day <> '' AND day >= ?1 AND day < ?2
  AND (:site_count = 0 OR site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
      :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16));
