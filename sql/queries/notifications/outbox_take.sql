-- Takes pending notifications whose time has come, oldest first, at most
-- :limit, for one sender: their next attempt moves to :lease_until, so
-- that no other sender on the same database takes them meanwhile, and a
-- sender that stops mid-delivery (killed, its machine gone) hands them
-- back when the lease ends; outbox_record.sql then writes the outcome.
-- SQLite's writer lock makes the take one at a time; PostgreSQL's text
-- (postgresql/outbox_take.sql) locks the rows it takes instead.
UPDATE notification_outbox
SET next_attempt_at = :lease_until
WHERE id IN (SELECT id FROM notification_outbox
             WHERE state = 'pending' AND next_attempt_at <= :now
             ORDER BY next_attempt_at, id
             LIMIT :limit)
RETURNING id, channel, study_instance_uid, accession_number, room, preset, rule_id, severity,
          quantity, measured_value, unit, limit_value, started_at, period, created_at, attempts;
