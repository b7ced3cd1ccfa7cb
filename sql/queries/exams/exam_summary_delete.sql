-- Rewriting the summary row of exam ?1 (store_refresh_summary, in the
-- transaction that wrote the exam): first the old row goes.
DELETE FROM exam_summaries WHERE study_instance_uid = ?1;
