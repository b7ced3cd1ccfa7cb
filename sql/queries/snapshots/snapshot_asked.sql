-- The kept document of view ?1 and request ?2 was asked for now (written
-- at most once an hour per document, so that serving stays a read).
UPDATE report_snapshots SET asked_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
WHERE view = ?1 AND request = ?2;
