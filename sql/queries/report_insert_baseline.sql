INSERT INTO baselines VALUES (:position, :exam_type, :count, :trailing_count, :thin,
                              :median, :mad, :p95);
