-- The days holding ultrasound instances in [?1, ?2] (NULL = open).
SELECT DISTINCT substr(coalesce(acquired_at, received_at), 1, 10) AS day FROM instances
WHERE is_ultrasound = 1 AND (CAST(?1 AS TEXT) IS NULL OR substr(coalesce(acquired_at, received_at), 1, 10) >= ?1)
  AND (CAST(?2 AS TEXT) IS NULL OR substr(coalesce(acquired_at, received_at), 1, 10) <= ?2)
ORDER BY day;
