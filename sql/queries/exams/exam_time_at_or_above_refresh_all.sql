-- Every exam's time at or above each threshold, recomputed from its
-- timeline after the ladder changed (store_open.c): what
-- exam_time_at_or_above_delete.sql and exam_time_at_or_above_insert.sql
-- do for one exam, for all of them.
DELETE FROM exam_time_at_or_above WHERE study_instance_uid IN (SELECT study_instance_uid FROM exams);
INSERT INTO exam_time_at_or_above (day, study_instance_uid, threshold, seconds)
SELECT s.day, s.study_instance_uid, t.threshold,
       iif((SELECT count(*) = count(i.id)
            FROM exam_timeline tl
            LEFT JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                                 AND i.study_instance_uid = tl.study_instance_uid
            WHERE tl.study_instance_uid = s.study_instance_uid),
           (SELECT coalesce(sum(iif(CASE s.governing_index WHEN 'tis' THEN i.tis
                                         WHEN 'tib' THEN i.tib WHEN 'tic' THEN i.tic END
                                    >= t.threshold, tl.attributed_seconds, 0)), 0)
            FROM exam_timeline tl
            CROSS JOIN instances i
            WHERE tl.study_instance_uid = s.study_instance_uid
              AND i.sop_instance_uid = tl.sop_instance_uid),
           NULL)
FROM exam_summaries s
CROSS JOIN ti_thresholds t
WHERE s.study_instance_uid IN (SELECT study_instance_uid FROM exams);
