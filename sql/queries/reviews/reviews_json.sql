-- GET /api/v1/reviews (JSON): the review history, oldest first. ?1 study
-- UID (NULL: every study), ?2 from, ?3 to ('YYYY-MM-DD', inclusive, on
-- the day the review was recorded, UTC; NULL: open). Each row carries
-- what was reviewed: the finding's rule and severity, or the whole exam.
SELECT coalesce(json_group_array(json(document)), '[]') FROM (
    SELECT json_object(
        'id', r.id, 'reviewed_at', r.reviewed_at, 'reviewer', r.reviewer, 'role', r.role,
        'study_instance_uid', r.study_instance_uid, 'finding_id', r.finding_id,
        'rule_id', f.rule_id, 'severity', f.severity,
        'outcome', r.outcome, 'comment', r.comment) AS document
    FROM reviews r LEFT JOIN findings f ON f.id = r.finding_id
    WHERE (CAST(?1 AS TEXT) IS NULL OR r.study_instance_uid = ?1)
      AND (CAST(?2 AS TEXT) IS NULL OR substr(r.reviewed_at, 1, 10) >= ?2)
      AND (CAST(?3 AS TEXT) IS NULL OR substr(r.reviewed_at, 1, 10) <= ?3)
    ORDER BY r.id);
