-- PostgreSQL's reviews_csv.sql (docs/postgresql-dialect.md): the same CSV
-- text; each field quoted from its text form (SQLite's json_each over a
-- json_array of the row, here an array of text), chr() for char(). Same
-- parameters (the sites too).
SELECT 'id,reviewed_at,reviewer,role,study_instance_uid,finding_id,rule_id,severity,'
       || 'outcome,comment' || chr(13) || chr(10)
       || coalesce(string_agg(line, '' ORDER BY id), '')
FROM (
    SELECT r.id,
           (SELECT string_agg('"' || replace(coalesce(field, ''), '"', '""') || '"', ','
                              ORDER BY position)
            FROM unnest(ARRAY[r.id::text, r.reviewed_at, r.reviewer, r.role,
                              r.study_instance_uid, r.finding_id::text, f.rule_id,
                              f.severity, r.outcome, r.comment])
                 WITH ORDINALITY AS fields(field, position))
           || chr(13) || chr(10) AS line
    FROM reviews r LEFT JOIN findings f ON f.id = r.finding_id
    WHERE (CAST(?1 AS TEXT) IS NULL OR r.study_instance_uid = ?1)
      AND (CAST(?2 AS TEXT) IS NULL OR substr(r.reviewed_at, 1, 10) >= ?2)
      AND (CAST(?3 AS TEXT) IS NULL OR substr(r.reviewed_at, 1, 10) <= ?3)
      AND (:site_count = 0 OR r.study_instance_uid IN (
          SELECT x.study_instance_uid FROM exam_summaries x
          WHERE x.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7, :site_8,
                           :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15,
                           :site_16)))) AS lines;
