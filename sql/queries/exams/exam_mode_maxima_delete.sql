-- Before writing a study's per-mode maxima again: ?1 study UID.
DELETE FROM exam_mode_maxima WHERE study_instance_uid = ?1;
