-- 011_explicit_summary_statements.sql - the exam summary and time-at-or-
-- above refreshes become plain statements that the store runs where it
-- writes (sql/queries/exam_summary_*.sql, exam_time_at_or_above_*.sql,
-- exam_summary_policy_refresh.sql), instead of INSTEAD OF triggers on
-- empty views that an INSERT into the view ran (migrations 005 and 006),
-- so that what a write does is read in one place: the store's code and
-- its statements. The summaries and times computed are the same.
--
-- The policies triggers re-read every exam's measurement when a policy
-- row was added or its version or first load changed; the store now runs
-- that statement after it adds a policy row (store_findings.c).

DROP TRIGGER exam_summaries_policy_insert;
DROP TRIGGER exam_summaries_policy_update;
DROP TRIGGER exam_summaries_policy_delete;
DROP TRIGGER exam_summary_policy_refresh_run;
DROP TRIGGER exam_summary_measured_refresh_run;
DROP TRIGGER exam_summary_refresh_run;
DROP TRIGGER exam_summary_dwell_refresh_run;
DROP VIEW exam_summary_policy_refresh;
DROP VIEW exam_summary_measured_refresh;
DROP VIEW exam_summary_refresh;
DROP VIEW exam_summary_dwell_refresh;

PRAGMA user_version = 11;
