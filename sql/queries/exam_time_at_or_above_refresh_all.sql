-- Every exam's time at or above each threshold, recomputed from its
-- timeline after the ladder changed (migration 006's procedure view).
INSERT INTO exam_summary_dwell_refresh SELECT study_instance_uid FROM exams;
