-- Before writing a study's timeline again: ?1 study UID.
DELETE FROM exam_timeline WHERE study_instance_uid = ?1;
