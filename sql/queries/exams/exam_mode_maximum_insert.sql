-- The largest value of one index among a study's captures in one mode.
INSERT INTO exam_mode_maxima (study_instance_uid, mode, rank, index_name, max_value)
VALUES (:study_instance_uid, :mode, :rank, :index_name, :max_value);
