INSERT INTO stat_rows VALUES (:position, :key, :is_total, :exam_count,
    :with_findings_count, :share_with_findings, :capture_count, :indexed_count,
    :completeness,
    :g_count, :g_min, :g_p05, :g_p25, :g_median, :g_p75, :g_p95, :g_max,
    :mi_count, :mi_min, :mi_p05, :mi_p25, :mi_median, :mi_p75, :mi_p95, :mi_max,
    :est_count, :est_median, :est_p75, :est_p95);
