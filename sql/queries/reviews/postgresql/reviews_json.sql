-- PostgreSQL's reviews_json.sql (docs/postgresql-dialect.md): the same
-- document, built with json_build_object (SQLite's json_object takes any
-- number of mixed arguments, which no PostgreSQL function can), the order
-- inside the aggregate.
SELECT json_group_array(json_build_object(
        'id', r.id, 'reviewed_at', r.reviewed_at, 'reviewer', r.reviewer, 'role', r.role,
        'study_instance_uid', r.study_instance_uid, 'finding_id', r.finding_id,
        'rule_id', f.rule_id, 'severity', f.severity,
        'outcome', r.outcome, 'comment', r.comment) ORDER BY r.id)
FROM reviews r LEFT JOIN findings f ON f.id = r.finding_id
WHERE (CAST(?1 AS TEXT) IS NULL OR r.study_instance_uid = ?1)
  AND (CAST(?2 AS TEXT) IS NULL OR substr(r.reviewed_at, 1, 10) >= ?2)
  AND (CAST(?3 AS TEXT) IS NULL OR substr(r.reviewed_at, 1, 10) <= ?3);
