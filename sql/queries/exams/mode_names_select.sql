-- The mode names the database holds by bit position (migration 004); the
-- store compares them with the exam vocabulary's at open.
SELECT rank, mode FROM mode_names ORDER BY rank;
