-- Rewriting the times at or above of exam ?1, after its summary row
-- (store_refresh_summary): first the old rows go.
DELETE FROM exam_time_at_or_above WHERE study_instance_uid = ?1;
