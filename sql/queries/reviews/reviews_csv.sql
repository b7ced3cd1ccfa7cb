-- GET /api/v1/reviews?format=csv: the rows of reviews_json.sql as one
-- CSV text (RFC 4180: CRLF line ends, every field quoted, quotes
-- doubled), with a header line. Same parameters.
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
    ORDER BY r.id);
