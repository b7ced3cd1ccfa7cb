-- What an evaluation needs of a study besides its exam record: room,
-- preset, shift, transducer and age group of the first instance
-- (acquisition order, untimed last), the last receipt and the seconds
-- since it. ?1 study, ?2 now (Unix seconds). Columns 0-4 as named,
-- 5 last_received_at, 6 idle seconds. One row (NULLs for no instance).
WITH first AS (
    SELECT room, preset, shift, transducer_data, age_group FROM instances
    WHERE study_instance_uid = ?1
    ORDER BY acquired_at IS NULL, acquired_at, id LIMIT 1)
SELECT (SELECT room FROM first), (SELECT preset FROM first),
       (SELECT shift FROM first), (SELECT transducer_data FROM first),
       (SELECT age_group FROM first),
       max(received_at),
       (julianday(?2, 'unixepoch') - julianday(max(received_at))) * 86400.0
FROM instances WHERE study_instance_uid = ?1;
