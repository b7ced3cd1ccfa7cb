-- Pending notifications whose time has come, oldest first.
SELECT id, channel, study_instance_uid, accession_number, room, preset, rule_id, severity,
       quantity, measured_value, unit, limit_value, started_at, period, created_at, attempts
FROM notification_outbox
WHERE state = 'pending' AND next_attempt_at <= :now
ORDER BY next_attempt_at, id
LIMIT :limit;
