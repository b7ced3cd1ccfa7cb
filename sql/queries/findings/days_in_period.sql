-- The days holding ultrasound instances in [?1, ?2] (NULL = open).
SELECT DISTINCT substr(coalesce(acquired_at, received_at), 1, 10) AS day FROM instances
WHERE is_ultrasound = 1 AND (?1 IS NULL OR day >= ?1) AND (?2 IS NULL OR day <= ?2)
ORDER BY day;
