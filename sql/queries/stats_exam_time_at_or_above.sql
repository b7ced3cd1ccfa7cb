-- Time at or above each governing TI threshold of the exams of a period
-- (day ?1 to ?2 inclusive, as stats_exam_rows.sql), for the thresholds of
-- the ladder up to ?3: one row per exam and threshold, in no order (the
-- store puts each on its exam's row). The seconds of the timeline whose
-- capture's displayed governing index is at or above the threshold, each
-- capture's attributed seconds already scaled by an SR scan time
-- (docs/domain.md section 5; an estimate). Stored per exam (migration
-- 006); computed here from the timeline for an exam that has none stored
-- (a timeline row refers to an instance that is not, or no longer, in
-- the study).
SELECT s.study_instance_uid, t.threshold,
       coalesce(d.seconds,
                (SELECT coalesce(sum(iif(
                     CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                            WHEN 'tic' THEN i.tic END >= t.threshold,
                     tl.attributed_seconds, 0)), 0)
                 FROM exam_timeline tl
                 CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                 WHERE tl.study_instance_uid = s.study_instance_uid))
FROM exam_summaries s
CROSS JOIN ti_thresholds t
LEFT JOIN exam_time_at_or_above d ON d.study_instance_uid = s.study_instance_uid
                                 AND d.threshold = t.threshold
WHERE s.day >= ?1 AND s.day <= ?2 AND t.threshold <= ?3;
