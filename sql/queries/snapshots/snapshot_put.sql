-- Keeps the document ?4 of view ?1 and request ?2, made from data of
-- signature ?3 in ?5 milliseconds, in place of an older one; ?6 is 1 when
-- it was made because it was asked for (the refresher passes 0 and leaves
-- the time it was last asked for as it was).
INSERT INTO report_snapshots (view, request, signature, body, made_at, made_ms, asked_at)
VALUES (?1, ?2, ?3, ?4, strftime('%Y-%m-%dT%H:%M:%fZ', 'now'), ?5,
        strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
ON CONFLICT (view, request) DO UPDATE SET
    signature = excluded.signature, body = excluded.body,
    made_at = excluded.made_at, made_ms = excluded.made_ms,
    asked_at = CASE WHEN ?6 <> 0 THEN excluded.asked_at ELSE report_snapshots.asked_at END;
