-- The first and last exam day held (store_load_day_range): the date part
-- of the least and greatest first acquisition (exams_first_acquired; the
-- date part is monotonic in the text), NULL when no exam has one.
SELECT substr((SELECT min(first_acquired_at) FROM exams), 1, 10),
       substr((SELECT max(first_acquired_at) FROM exams), 1, 10);
