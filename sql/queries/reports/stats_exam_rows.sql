-- The exams of a period for statistics and outliers (store_load_exam_rows):
-- one row per exam whose local day (the date part of its first
-- acquisition as the modality gave it, else of its first receipt) is
-- between ?1 and ?2 ('YYYY-MM-DD', inclusive), in no order: the store
-- sorts the rows by Study Instance UID (cheaper than SQLite's sorter,
-- which copies each row into a record and back).
--
-- One range scan of exam_summaries by day through exam_period_rows
-- (migration 005: how the summaries are kept exact, where context and
-- estimated seconds come from). Time at or above each governing TI
-- threshold: stats_exam_time_at_or_above.sql. captures: image,
-- multi-frame and volume objects; indexed: those of them with at least
-- one index. site: the exam's (its first instance's), from its summary row.
-- informational: the exam's findings that are advisories below their own
-- limit (first-trimester Doppler used below its TI limit), counted apart
-- from "with findings" as the worklist lists them apart
-- (queries/reviews/review_worklist.sql). worst_severity: the exam's most
-- severe finding, 3 violation, 2 warning, 1 advisory above its own limit,
-- 0 none or informational only (exam.h, EXAM_SEVERITY_RANK_*).
-- :site_count, :site_1 ... :site_16: the sites asked for (migration 013;
-- :site_count 0: every site; names not held match nothing).
SELECT exam_period_rows.study_instance_uid, exam_period_rows.day, exam_period_rows.exam_type,
       exam_period_rows.exam_type_label, exam_period_rows.governing_index,
       exam_period_rows.max_governing, exam_period_rows.max_mi, room, preset, shift, transducer,
       exam_period_rows.study_description,
       exam_period_rows.estimated_seconds, exam_period_rows.captures,
       exam_period_rows.indexed_count, exam_period_rows.finding_count,
       exam_period_rows.first_acquired_at,
       CASE WHEN exam_period_rows.finding_count > 0 THEN
           (SELECT count(*) FROM findings f
            WHERE f.study_instance_uid = exam_period_rows.study_instance_uid
              AND f.superseded = 0 AND f.severity = 'advisory'
              AND f.measured_value < f.limit_value)
       ELSE 0 END,
       CASE WHEN exam_period_rows.finding_count > 0 THEN
           (SELECT max(CASE f.severity WHEN 'violation' THEN 3 WHEN 'warning' THEN 2
                       WHEN 'advisory' THEN iif(f.measured_value < f.limit_value, 0, 1)
                       ELSE 0 END)
            FROM findings f
            WHERE f.study_instance_uid = exam_period_rows.study_instance_uid
              AND f.superseded = 0)
       ELSE 0 END,
       x.site
FROM exam_period_rows
JOIN exam_summaries x ON x.day = exam_period_rows.day
     AND x.study_instance_uid = exam_period_rows.study_instance_uid
WHERE exam_period_rows.day >= ?1 AND exam_period_rows.day <= ?2
  AND (:site_count = 0 OR x.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
      :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16));
