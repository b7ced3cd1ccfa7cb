-- The same for a device-level rule and period. ?1 rule, ?2 version, ?3 period.
SELECT (SELECT evaluation_hash FROM device_evaluations
        WHERE rule_id = ?1 AND policy_version = ?2 AND period = ?3),
       (SELECT count(*) FROM findings
        WHERE study_instance_uid IS NULL AND rule_id = ?1 AND period = ?3
          AND policy_version <> ?2 AND superseded = 0);
