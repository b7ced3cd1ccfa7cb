-- What a period view's document depends on besides its request
-- (report_snapshot.c): the change counts of its days (?1 to ?2 inclusive,
-- 'YYYY-MM-DD'; migration 018's triggers raise them with every write of
-- the day's exams, times at or above and findings), the policies held
-- (a document names the last one loaded), and the first and last exam
-- day held (a document states them). Any write that could change the
-- document changes one of these.
SELECT coalesce(sum(changes), 0), count(*),
       (SELECT count(*) FROM policies),
       (SELECT max(first_loaded_at) FROM policies),
       substr((SELECT min(first_acquired_at) FROM exams), 1, 10),
       substr((SELECT max(first_acquired_at) FROM exams), 1, 10)
FROM data_days
WHERE day >= ?1 AND day <= ?2;
