-- The kept document of view ?1 and request ?2 when it was made from data
-- of signature ?3, when it was made and when it was last asked for; no
-- row otherwise.
SELECT body, made_at, asked_at FROM report_snapshots
WHERE view = ?1 AND request = ?2 AND signature = ?3;
