-- One mode of the exam vocabulary (exam_mode_name()) at its bit position.
INSERT INTO mode_names (rank, mode) VALUES (?1, ?2);
