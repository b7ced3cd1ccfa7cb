-- The times of exam ?1 at every threshold of the ladder, from its
-- timeline; NULL seconds when a timeline row refers to an instance that
-- is missing or in another study (the period query then computes them).
-- Takes the day and governing index from the exam's summary row, so runs
-- after exam_summary_insert.sql.
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
WHERE s.study_instance_uid = ?1;
