-- PostgreSQL's outbox_take.sql: the same take (see the common file), with
-- the rows locked as they are chosen and those another sender has locked
-- skipped (SELECT ... FOR UPDATE SKIP LOCKED, PostgreSQL documentation
-- "The Locking Clause"), so that receivers sharing one database each take
-- other rows and a finding is delivered once, not once per receiver.
UPDATE notification_outbox
SET next_attempt_at = :lease_until
WHERE id IN (SELECT id FROM notification_outbox
             WHERE state = 'pending' AND next_attempt_at <= :now
             ORDER BY next_attempt_at, id
             LIMIT :limit
             FOR UPDATE SKIP LOCKED)
RETURNING id, channel, study_instance_uid, accession_number, room, preset, rule_id, severity,
          quantity, measured_value, unit, limit_value, started_at, period, created_at, attempts;
