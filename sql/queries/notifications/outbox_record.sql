-- The outcome of one delivery attempt: :state 'delivered', 'pending'
-- (retry at :next_attempt_at) or 'failed' (given up).
UPDATE notification_outbox
SET state = :state,
    attempts = attempts + 1,
    next_attempt_at = :next_attempt_at,
    last_error = :last_error,
    delivered_at = CASE WHEN :state = 'delivered' THEN :now ELSE delivered_at END
WHERE id = :id;
