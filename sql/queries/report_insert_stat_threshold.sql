INSERT INTO stat_thresholds VALUES (:row_position, :threshold, :exam_count,
    :median_seconds, :p95_seconds, :total_seconds);
