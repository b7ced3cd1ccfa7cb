-- What a report states about its data (store_load_period_info): the
-- current policy (the last one loaded), the policy versions of the
-- period's findings (not superseded; ?1, ?2 as in stats_exam_rows.sql),
-- and the first and last exam day held.
SELECT (SELECT version FROM policies ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1),
       (SELECT name FROM policies ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1),
       (SELECT group_concat(version, ',') FROM
           (SELECT DISTINCT f.policy_version AS version
            FROM findings f JOIN exams e ON e.study_instance_uid = f.study_instance_uid
            WHERE f.superseded = 0
              AND substr(e.first_acquired_at, 1, 10) BETWEEN ?1 AND ?2
            ORDER BY 1)),
       (SELECT min(substr(first_acquired_at, 1, 10)) FROM exams),
       (SELECT max(substr(first_acquired_at, 1, 10)) FROM exams);
