-- GET /api/v1/reviews?format=csv: the rows of reviews_json.sql as one
-- CSV text (RFC 4180: CRLF line ends, every field quoted, quotes
-- doubled), with a header line. Same parameters (the sites too).
SELECT 'id,reviewed_at,reviewer,role,study_instance_uid,finding_id,rule_id,severity,'
       || 'outcome,comment' || char(13, 10)
       || coalesce(group_concat(line, ''), '')
FROM (
    SELECT (SELECT group_concat('"' || replace(coalesce(CAST(value AS TEXT), ''), '"', '""')
                                || '"', ',')
            FROM json_each(json_array(r.id, r.reviewed_at, r.reviewer, r.role,
                                      r.study_instance_uid, r.finding_id, f.rule_id,
                                      f.severity, r.outcome, r.comment)))
           || char(13, 10) AS line
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
