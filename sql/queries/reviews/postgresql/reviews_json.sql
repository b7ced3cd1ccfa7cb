-- PostgreSQL's reviews_json.sql (docs/postgresql-dialect.md): the same
-- document, built with json_build_object (SQLite's json_object takes any
-- number of mixed arguments, which no PostgreSQL function can), the order
-- inside the aggregate. The sites asked for as in the common file
-- (:site_count, :site_1 ... :site_16; 0: every site).
SELECT json_group_array(json_build_object(
        'id', r.id, 'reviewed_at', r.reviewed_at, 'reviewer', r.reviewer, 'role', r.role,
        'study_instance_uid', r.study_instance_uid, 'finding_id', r.finding_id,
        'rule_id', f.rule_id, 'severity', f.severity,
        'outcome', r.outcome, 'comment', r.comment) ORDER BY r.id)
FROM reviews r LEFT JOIN findings f ON f.id = r.finding_id
WHERE (CAST(?1 AS TEXT) IS NULL OR r.study_instance_uid = ?1)
  AND (CAST(?2 AS TEXT) IS NULL OR substr(r.reviewed_at, 1, 10) >= ?2)
  AND (CAST(?3 AS TEXT) IS NULL OR substr(r.reviewed_at, 1, 10) <= ?3)
  AND (:site_count = 0 OR r.study_instance_uid IN (
      SELECT x.study_instance_uid FROM exam_summaries x
      WHERE x.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                       :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15,
                       :site_16)));
