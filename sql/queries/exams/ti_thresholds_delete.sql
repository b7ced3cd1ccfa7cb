-- Before the store writes the exam vocabulary's ladder (store_open.c).
DELETE FROM ti_thresholds;
