-- A study found by C-FIND: recorded once per source; a study seen again
-- keeps its state and counts, only what the PACS says of it is renewed.
-- ?1 source, ?2 study UID, ?3 study date, ?4 accession number,
-- ?5 description, ?6 expected objects (NULL unknown), ?7 now (UTC).
INSERT INTO backfill_studies (source, study_instance_uid, state, study_date, accession_number,
                              study_description, expected_objects, found_at)
VALUES (?1, ?2, 'found', ?3, ?4, ?5, ?6, ?7)
ON CONFLICT (source, study_instance_uid) DO UPDATE SET
    study_date = excluded.study_date,
    accession_number = excluded.accession_number,
    study_description = excluded.study_description,
    expected_objects = excluded.expected_objects;
