-- After a policy row was added (store_findings.c): every exam summary
-- whose measurement is not of the current policy (the last loaded) takes
-- that policy's estimated seconds, or NULL when it has not measured the
-- exam.
UPDATE exam_summaries SET (measured_policy, measured_seconds) = (
    SELECT p.version,
           (SELECT m.estimated_seconds FROM exam_measurements m
            WHERE m.study_instance_uid = exam_summaries.study_instance_uid
              AND m.policy_version = p.version)
    FROM (SELECT NULL) LEFT JOIN (SELECT version FROM policies
                                  ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1) AS p)
WHERE measured_policy IS NOT (SELECT version FROM policies
                              ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1);
