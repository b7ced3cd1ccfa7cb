-- Findings (not superseded) by exam and rule for the exams of a period
-- (?1, ?2: 'YYYY-MM-DD', inclusive; the exam's day as in
-- stats_exam_rows.sql), ordered by Study Instance UID and rule.
SELECT f.study_instance_uid, f.rule_id, count(*)
FROM findings f
JOIN exams e ON e.study_instance_uid = f.study_instance_uid
WHERE f.superseded = 0
  AND substr(coalesce(e.first_acquired_at,
                      (SELECT min(j.received_at) FROM instances j
                       WHERE j.study_instance_uid = e.study_instance_uid)), 1, 10)
      BETWEEN ?1 AND ?2
GROUP BY f.study_instance_uid, f.rule_id
ORDER BY f.study_instance_uid, f.rule_id;
