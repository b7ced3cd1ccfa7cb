-- The current findings of one evaluation (an exam, or a device-level rule
-- and period) at or above a severity, queued for one channel. A finding
-- already queued under the same key is left alone (sent once).
-- :study NULL: device-level (:rule_id, :period). Each parameter is first
-- compared with a column, so that PostgreSQL knows its type. Severity ranks:
-- advisory 1, warning 2, violation 3. Of several findings under one key
-- the highest value is queued (NULLs last on both engines).
INSERT INTO notification_outbox (
    finding_key, channel, study_instance_uid, accession_number, room, preset,
    rule_id, severity, quantity, measured_value, unit, limit_value,
    started_at, period, created_at, next_attempt_at)
SELECT coalesce(f.study_instance_uid, '') || '|' || f.rule_id || '|' || f.severity || '|'
           || coalesce(f.quantity, '') || '|' || coalesce(f.period, ''),
       :channel, f.study_instance_uid,
       (SELECT max(i.accession_number) FROM instances i
        WHERE i.study_instance_uid = f.study_instance_uid),
       f.room, f.preset, f.rule_id, f.severity, f.quantity, f.measured_value, f.unit,
       f.limit_value, f.started_at, f.period, :now, :now
FROM findings f
WHERE f.superseded = 0 AND f.policy_version = :policy_version
  AND ((f.study_instance_uid = :study AND :study IS NOT NULL)
       OR (f.study_instance_uid IS NULL AND f.rule_id = :rule_id AND f.period = :period
           AND :study IS NULL))
  AND (CASE f.severity WHEN 'violation' THEN 3 WHEN 'warning' THEN 2 ELSE 1 END)
      >= :minimum_rank
ORDER BY f.measured_value IS NULL, f.measured_value DESC, f.id
ON CONFLICT (finding_key, channel) DO NOTHING;
