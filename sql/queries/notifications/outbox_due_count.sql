-- Whether any pending notification's time has come (0 or 1), read before
-- a take so that an idle sender does not write every pass.
SELECT count(*) FROM (SELECT 1 FROM notification_outbox
                      WHERE state = 'pending' AND next_attempt_at <= :now
                      LIMIT 1) AS due;
