-- Findings (not superseded) by exam and rule for the exams of a period
-- (?1, ?2: 'YYYY-MM-DD', inclusive; the exam's day as in
-- stats_exam_rows.sql), ordered by Study Instance UID and rule. Walks from
-- the period's exam summaries that count findings to their findings (CROSS
-- JOIN keeps that order: not every finding held, then its exam).
SELECT f.study_instance_uid, f.rule_id, count(*)
FROM exam_summaries s
CROSS JOIN findings f
WHERE s.day >= ?1 AND s.day <= ?2 AND s.finding_count > 0
  AND f.study_instance_uid = s.study_instance_uid AND f.superseded = 0
GROUP BY f.study_instance_uid, f.rule_id
ORDER BY f.study_instance_uid, f.rule_id;
