INSERT INTO groups VALUES (:position, :key, :exam_count, :valued_count, :outlier_count,
    :outlier_rate, :median_governing, :department_median, :median_ratio, :median_mi,
    :capture_count, :indexed_count, :completeness, :finding_count);
