-- The stored hash of an exam's evaluation under a version, and how many
-- current findings of other versions it still has. ?1 study, ?2 version.
SELECT (SELECT evaluation_hash FROM exam_measurements
        WHERE study_instance_uid = ?1 AND policy_version = ?2),
       (SELECT count(*) FROM findings
        WHERE study_instance_uid = ?1 AND policy_version <> ?2 AND superseded = 0);
