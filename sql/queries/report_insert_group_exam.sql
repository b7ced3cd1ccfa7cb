INSERT INTO group_exams VALUES (:group_position, :position, :study_instance_uid,
    :study_key, :day, :first_acquired_at, :exam_type, :exam_type_label,
    :study_description, :room, :preset, :shift, :transducer, :governing_index,
    :max_governing, :max_mi, :robust_z, :above_robust_z, :above_p95, :outlier,
    :finding_count, :baseline_thin, :baseline_median, :baseline_p95,
    :estimated_seconds);
