INSERT INTO drift_series VALUES (:position, :preset, :room, :exam_type, :flagged_count,
                                 :max_abs_z);
