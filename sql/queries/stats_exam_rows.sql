-- The exams of a period for statistics and outliers (store_load_exam_rows):
-- one row per exam whose local day (the date part of its first
-- acquisition as the modality gave it, else of its first receipt) is
-- between ?1 and ?2 ('YYYY-MM-DD', inclusive), ordered by Study Instance UID.
--
-- One range scan of exam_summaries by day (migration 005, which says how
-- the summaries are kept exact). Context (room, preset, shift, transducer)
-- from exam_context when the policy engine has written it, else from the
-- exam's first instance. Estimated seconds from the current policy's
-- exam_measurements when present, else from the exam record. Time at or
-- above each governing TI threshold (0.7, 1.0, 1.5, 2.0) is summed over the
-- exam timeline: each capture's attributed seconds (already scaled by an
-- SR scan time) count when its displayed governing index is at or above
-- the threshold (domain reference section 5; an estimate); a summary whose
-- sums are not known (NULL: its timeline is being rewritten or refers to an
-- instance of another study) is summed here from the timeline. captures:
-- image, multi-frame and volume objects; indexed: those of them with at
-- least one index.
WITH current_policy AS MATERIALIZED (
    SELECT (SELECT version FROM policies
            ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1) AS version
)
SELECT s.study_instance_uid,
       s.day,
       s.exam_type,
       s.exam_type_label,
       s.governing_index,
       s.max_governing,
       s.max_mi,
       coalesce(s.context_room, s.first_room) AS room,
       coalesce(s.context_preset, s.first_preset) AS preset,
       coalesce(s.context_shift, s.first_shift) AS shift,
       coalesce(s.context_transducer, s.first_transducer) AS transducer,
       s.study_description,
       coalesce(CASE WHEN s.measured_policy IS cp.version THEN s.measured_seconds
                     ELSE (SELECT m.estimated_seconds FROM exam_measurements m
                           WHERE m.study_instance_uid = s.study_instance_uid
                             AND m.policy_version = cp.version) END,
                s.estimated_seconds) AS estimated_seconds,
       coalesce(s.s07, (SELECT coalesce(sum(iif(
                    CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                           WHEN 'tic' THEN i.tic END >= 0.7,
                    tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid)),
       coalesce(s.s10, (SELECT coalesce(sum(iif(
                    CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                           WHEN 'tic' THEN i.tic END >= 1.0,
                    tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid)),
       coalesce(s.s15, (SELECT coalesce(sum(iif(
                    CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                           WHEN 'tic' THEN i.tic END >= 1.5,
                    tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid)),
       coalesce(s.s20, (SELECT coalesce(sum(iif(
                    CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                           WHEN 'tic' THEN i.tic END >= 2.0,
                    tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid)),
       s.captures,
       s.indexed_count,
       s.finding_count,
       s.first_acquired_at
FROM current_policy cp
CROSS JOIN exam_summaries s
WHERE s.day >= ?1 AND s.day <= ?2
ORDER BY s.study_instance_uid;
