-- Rewrites the summary row of exam ?1 from what the tables hold now
-- (migration 005's procedure view), in the transaction that wrote the
-- exam (store_write.c).
INSERT INTO exam_summary_refresh VALUES (?1);
