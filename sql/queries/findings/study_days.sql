-- The days (acquisition, else receipt) a study's instances fall on. ?1 study.
SELECT DISTINCT substr(coalesce(acquired_at, received_at), 1, 10) FROM instances
WHERE study_instance_uid = ?1 ORDER BY 1;
