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
-- one index.
-- informational: the exam's findings that are advisories below their own
-- limit (first-trimester Doppler used below its TI limit), counted apart
-- from "with findings" as the worklist lists them apart
-- (queries/reviews/review_worklist.sql). worst_severity: the exam's most
-- severe finding, 3 violation, 2 warning, 1 advisory above its own limit,
-- 0 none or informational only (exam.h, EXAM_SEVERITY_RANK_*).
-- Sites (migration 013): :site_count, :site_1 ... :site_16 (:site_count
-- 0: every site; a name not held matches nothing). An exam's site is
-- its summary row's (its first instance's), looked up by the summary's
-- primary key only when sites are asked for (OR stops at :site_count =
-- 0), so that the unfiltered read costs what it did.
SELECT study_instance_uid, day, exam_type, exam_type_label, governing_index,
       max_governing, max_mi, room, preset, shift, transducer, study_description,
       estimated_seconds, captures, indexed_count, finding_count,
       first_acquired_at,
       CASE WHEN finding_count > 0 THEN
           (SELECT count(*) FROM findings f
            WHERE f.study_instance_uid = exam_period_rows.study_instance_uid
              AND f.superseded = 0 AND f.severity = 'advisory'
              AND f.measured_value < f.limit_value)
       ELSE 0 END,
       CASE WHEN finding_count > 0 THEN
           (SELECT max(CASE f.severity WHEN 'violation' THEN 3 WHEN 'warning' THEN 2
                       WHEN 'advisory' THEN iif(f.measured_value < f.limit_value, 0, 1)
                       ELSE 0 END)
            FROM findings f
            WHERE f.study_instance_uid = exam_period_rows.study_instance_uid
              AND f.superseded = 0)
       ELSE 0 END
FROM exam_period_rows
WHERE day >= ?1 AND day <= ?2
  AND (:site_count = 0 OR (SELECT x.site FROM exam_summaries x
           WHERE x.day = exam_period_rows.day
             AND x.study_instance_uid = exam_period_rows.study_instance_uid)
       IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
           :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16));
