-- Study UIDs of the exams whose first acquisition (or, without one, first
-- receipt) falls in [?1, ?2] (dates 'YYYY-MM-DD', NULL = open), in time order.
SELECT e.study_instance_uid FROM exams e
WHERE (CAST(?1 AS TEXT) IS NULL OR substr(coalesce(e.first_acquired_at,
        (SELECT min(received_at) FROM instances i WHERE i.study_instance_uid = e.study_instance_uid)), 1, 10) >= ?1)
  AND (CAST(?2 AS TEXT) IS NULL OR substr(coalesce(e.first_acquired_at,
        (SELECT min(received_at) FROM instances i WHERE i.study_instance_uid = e.study_instance_uid)), 1, 10) <= ?2)
ORDER BY e.first_acquired_at, e.study_instance_uid;
