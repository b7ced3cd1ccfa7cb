-- A device-level rule's evaluation of one period.
INSERT INTO device_evaluations (rule_id, policy_version, period, evaluation_hash, evaluated_at)
VALUES (:rule_id, :policy_version, :period, :evaluation_hash,
        strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
ON CONFLICT (rule_id, policy_version, period) DO UPDATE SET
    evaluation_hash = excluded.evaluation_hash, evaluated_at = excluded.evaluated_at;
