-- The planner's statistics of the tables just filled.
ANALYZE;
