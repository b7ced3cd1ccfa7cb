-- POST /api/v1/reviews: appends one review. ?1 study UID (NULL only with
-- a finding), ?2 finding id (NULL: the whole exam), ?3 outcome, ?4
-- comment, ?5 reviewer, ?6 role. Writes nothing (changes() = 0) when the
-- finding does not exist or belongs to another study, or the exam is
-- unknown: the caller then answers 404.
INSERT INTO reviews (study_instance_uid, finding_id, outcome, comment, reviewer, role,
                     reviewed_at)
SELECT coalesce(?1, (SELECT study_instance_uid FROM findings WHERE id = ?2)), ?2, ?3, ?4, ?5, ?6,
       strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
WHERE (?2 IS NULL AND EXISTS (SELECT 1 FROM exams WHERE study_instance_uid = ?1))
   OR (?2 IS NOT NULL AND EXISTS (SELECT 1 FROM findings
                                  WHERE id = ?2 AND (?1 IS NULL OR study_instance_uid IS NOT DISTINCT FROM ?1)));
