-- The kept documents asked for at or after ?1 (ISO 8601 UTC), the most
-- recently asked first, at most ?2: view, request and the signature each
-- was made from (the refresher makes again those whose data has changed).
SELECT view, request, signature FROM report_snapshots
WHERE asked_at >= ?1
ORDER BY asked_at DESC, view, request
LIMIT ?2;
