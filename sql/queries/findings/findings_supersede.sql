-- Findings of other policy versions for the same exam (or device-level
-- rule and period) are kept, marked superseded. Parameters as
-- findings_delete.sql.
UPDATE findings SET superseded = 1
WHERE policy_version <> ?2 AND superseded = 0
  AND ((CAST(?1 AS TEXT) IS NOT NULL AND study_instance_uid = ?1)
       OR (CAST(?1 AS TEXT) IS NULL AND study_instance_uid IS NULL AND rule_id = ?3 AND period = ?4));
