-- PostgreSQL's stats_policy_info.sql (docs/postgresql-dialect.md): the same
-- statement with policies.row_order (012_baseline.sql) where SQLite orders
-- by its rowid, the order policies were first registered in.
-- What a report states about its data (store_load_period_info): the
-- current policy (the last one loaded), the policy versions of the
-- period's findings (not superseded; ?1, ?2 as in stats_exam_rows.sql, on
-- exams with a first acquisition), and the first and last exam day held
-- (exams_first_acquired; the date part is monotonic in the text, so the
-- date of the least time is the least date).
SELECT (SELECT version FROM policies ORDER BY first_loaded_at DESC, row_order DESC LIMIT 1),
       (SELECT name FROM policies ORDER BY first_loaded_at DESC, row_order DESC LIMIT 1),
       (SELECT group_concat(version, ',') FROM
           (SELECT DISTINCT f.policy_version AS version
            FROM exam_summaries s
            CROSS JOIN findings f
            WHERE s.day >= ?1 AND s.day <= ?2 AND s.finding_count > 0
              AND f.study_instance_uid = s.study_instance_uid AND f.superseded = 0
              AND s.first_acquired_at IS NOT NULL
            ORDER BY 1) AS versions),
       substr((SELECT min(first_acquired_at) FROM exams), 1, 10),
       substr((SELECT max(first_acquired_at) FROM exams), 1, 10);
