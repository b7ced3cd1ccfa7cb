-- Replacing an evaluation: this version's findings of the exam (?1 study)
-- or of the device-level rule and period (?1 NULL, ?3 rule, ?4 period).
DELETE FROM findings
WHERE policy_version = ?2
  AND ((CAST(?1 AS TEXT) IS NOT NULL AND study_instance_uid = ?1)
       OR (CAST(?1 AS TEXT) IS NULL AND study_instance_uid IS NULL AND rule_id = ?3 AND period = ?4));
