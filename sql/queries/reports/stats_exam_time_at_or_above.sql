-- Time at or above each governing TI threshold of the exams of a period
-- (day ?1 to ?2 inclusive, as stats_exam_rows.sql), for the thresholds of
-- the ladder up to ?3: one row per exam and threshold, in day and study
-- order (the store puts each on its exam's row). The seconds of the
-- timeline whose capture's displayed governing index is at or above the
-- threshold, each capture's attributed seconds already scaled by an SR
-- scan time (docs/domain.md section 5; an estimate). Stored per exam
-- (migration 006: one range scan by day); computed here from the timeline
-- where the stored value is NULL (a timeline row refers to an instance
-- that is not, or no longer, in the study).
SELECT d.study_instance_uid, d.threshold,
       coalesce(d.seconds,
                (SELECT coalesce(sum(iif(
                     CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                            WHEN 'tic' THEN i.tic END >= d.threshold,
                     tl.attributed_seconds, 0)), 0)
                 FROM exam_summaries s
                 CROSS JOIN exam_timeline tl
                 CROSS JOIN instances i
                 WHERE s.study_instance_uid = d.study_instance_uid
                   AND tl.study_instance_uid = s.study_instance_uid
                   AND i.sop_instance_uid = tl.sop_instance_uid))
FROM exam_time_at_or_above d
WHERE d.day >= ?1 AND d.day <= ?2 AND d.threshold <= ?3;
