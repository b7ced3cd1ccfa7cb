-- The TI threshold ladder the database holds (migration 006), ascending;
-- the store compares it with the exam vocabulary's at open.
SELECT threshold FROM ti_thresholds ORDER BY threshold;
