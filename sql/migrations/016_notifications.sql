-- 016_notifications.sql - the outbox of findings to notify (webhook,
-- syslog). A row is written in the transaction that writes its finding,
-- so nothing is lost when the daemon stops before it is sent; the sender
-- thread (src/notify) delivers it later, retrying with backoff. One row
-- per finding and channel; finding_key says what makes a later finding
-- "the same one" (study, rule, severity, quantity, period), so that a
-- re-evaluation of the same exam does not send it again.
--
-- Patient names and IDs are never copied here: only the study, accession
-- number, room, preset and the finding's own values.
CREATE TABLE notification_outbox (
    id                  INTEGER PRIMARY KEY,
    finding_key         TEXT NOT NULL,
    channel             TEXT NOT NULL CHECK (channel IN ('webhook', 'syslog')),
    study_instance_uid  TEXT,          -- NULL for a device-level finding
    accession_number    TEXT,
    room                TEXT,
    preset              TEXT,
    rule_id             TEXT NOT NULL,
    severity            TEXT NOT NULL,
    quantity            TEXT,
    measured_value      REAL,
    unit                TEXT,
    limit_value         REAL,
    started_at          TEXT,
    period              TEXT,
    created_at          TEXT NOT NULL, -- ISO 8601 UTC
    state               TEXT NOT NULL DEFAULT 'pending'
        CHECK (state IN ('pending', 'delivered', 'failed')),
    attempts            INTEGER NOT NULL DEFAULT 0 CHECK (attempts >= 0),
    next_attempt_at     TEXT NOT NULL, -- ISO 8601 UTC
    last_error          TEXT,
    delivered_at        TEXT,
    UNIQUE (finding_key, channel)
);

CREATE INDEX notification_outbox_due ON notification_outbox (state, next_attempt_at);

PRAGMA user_version = 16;
