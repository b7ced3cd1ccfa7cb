-- Before the store writes the exam vocabulary's mode names (store_open.c).
DELETE FROM mode_names;
