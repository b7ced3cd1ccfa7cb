INSERT INTO drift_points VALUES (:series_position, :position, :week, :monday, :count,
    :median, :baseline_count, :baseline_median, :baseline_mad, :z, :flagged);
