-- One threshold of the exam vocabulary's ladder (exam_ti_ladder).
INSERT INTO ti_thresholds (threshold) VALUES (?1);
