-- GET /api/v1/reviews (JSON): the review history, oldest first. ?1 study
-- UID (NULL: every study), ?2 from, ?3 to ('YYYY-MM-DD', inclusive, on
-- the day the review was recorded, UTC; NULL: open). Each row carries
-- what was reviewed: the finding's rule and severity, or the whole exam.
-- :site_count, :site_1 ... :site_16: the sites whose exams' reviews are
-- read (migration 013; 0: every site).
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
      AND (:site_count = 0 OR r.study_instance_uid IN (
          SELECT x.study_instance_uid FROM exam_summaries x
          WHERE x.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                           :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15,
                           :site_16)))
    ORDER BY r.id);
