-- 006_time_at_or_above_rows.sql - time at or above each displayed TI
-- threshold as rows (exam, threshold, seconds) instead of one hand-written
-- column per threshold (exam_summaries.s07, s10, s15, s20 of migration
-- 005), so that the thresholds are the one ladder of the exam vocabulary
-- (exam_ti_ladder, src/exam/exam.h) and SQL loops over it.
--
-- ti_thresholds holds that ladder (and mode_names of migration 004 the
-- vocabulary's mode names, which the store keeps the same way). The store writes it from the C
-- definition each time it opens the database (store_open.c): when the
-- ladder it finds differs from its own, it replaces the rows and
-- recomputes every exam's times in the same transaction. This migration
-- fills it with the thresholds the dropped columns held, so that their
-- data stays meaningful until then.
--
-- exam_measurement_time_at_or_above holds the same per exam and policy
-- version as each evaluation measured it (on the policy's gap cap),
-- formerly the JSON object exam_measurements.seconds_at_or_above with a
-- hand-written key per threshold; the study document still shows it as
-- that object, keyed by the threshold's text.
--
-- exam_time_at_or_above holds, per exam and threshold, the seconds of the
-- exam timeline whose capture's displayed governing index is at or above
-- the threshold (docs/domain.md section 5; an estimate), keyed by the
-- exam's day like exam_summaries. An exam has a row for every threshold
-- of the ladder; its seconds are NULL when a timeline row refers to an
-- instance that is not, or no longer, in the study: the queries then
-- compute the times from the timeline, as the NULL columns meant before.

CREATE TABLE ti_thresholds (
    threshold REAL PRIMARY KEY CHECK (threshold > 0)
) STRICT, WITHOUT ROWID;

INSERT INTO ti_thresholds (threshold) VALUES (0.7), (1.0), (1.5), (2.0);

CREATE TABLE exam_time_at_or_above (
    day                TEXT NOT NULL,  -- the exam's day, as in exam_summaries
    study_instance_uid TEXT NOT NULL,
    threshold          REAL NOT NULL,
    seconds            REAL,           -- NULL: computed from the timeline when read
    PRIMARY KEY (day, study_instance_uid, threshold)
) STRICT, WITHOUT ROWID;
-- A period's times are one range scan by day; an exam's are found by study.
CREATE INDEX exam_time_at_or_above_study ON exam_time_at_or_above (study_instance_uid);

INSERT INTO exam_time_at_or_above (day, study_instance_uid, threshold, seconds)
SELECT day, study_instance_uid, 0.7, s07 FROM exam_summaries
UNION ALL
SELECT day, study_instance_uid, 1.0, s10 FROM exam_summaries
UNION ALL
SELECT day, study_instance_uid, 1.5, s15 FROM exam_summaries
UNION ALL
SELECT day, study_instance_uid, 2.0, s20 FROM exam_summaries;

CREATE TABLE exam_measurement_time_at_or_above (
    study_instance_uid TEXT NOT NULL,
    policy_version     TEXT NOT NULL,
    threshold          REAL NOT NULL,
    seconds            REAL NOT NULL,
    PRIMARY KEY (study_instance_uid, policy_version, threshold),
    FOREIGN KEY (study_instance_uid, policy_version)
        REFERENCES exam_measurements (study_instance_uid, policy_version) ON DELETE CASCADE
) STRICT, WITHOUT ROWID;

INSERT INTO exam_measurement_time_at_or_above
    (study_instance_uid, policy_version, threshold, seconds)
SELECT m.study_instance_uid, m.policy_version, CAST(j.key AS REAL), j.value
FROM exam_measurements m, json_each(m.seconds_at_or_above) j
WHERE j.value IS NOT NULL;

ALTER TABLE exam_measurements DROP COLUMN seconds_at_or_above;

-- The columns go; what read them first.
DROP TRIGGER exam_summary_dwell_refresh_run;
DROP VIEW exam_period_rows;
ALTER TABLE exam_summaries DROP COLUMN s07;
ALTER TABLE exam_summaries DROP COLUMN s10;
ALTER TABLE exam_summaries DROP COLUMN s15;
ALTER TABLE exam_summaries DROP COLUMN s20;

-- An exam deleted: its times with it (as its summary, migration 005).
CREATE TRIGGER exam_time_at_or_above_exam_delete AFTER DELETE ON exams
BEGIN
    DELETE FROM exam_time_at_or_above WHERE study_instance_uid = OLD.study_instance_uid;
END;

-- The times of one exam at every threshold of the ladder, from its
-- timeline; NULL seconds when a timeline row refers to an instance that is
-- missing or in another study (the period query then computes them). Run
-- by the summary refresh of migration 005 (exam_summary_refresh), after
-- the summary row it takes the day and governing index from, and by the
-- store when the ladder changed.
CREATE TRIGGER exam_summary_dwell_refresh_run INSTEAD OF INSERT ON exam_summary_dwell_refresh
BEGIN
    DELETE FROM exam_time_at_or_above WHERE study_instance_uid = NEW.study_instance_uid;
    INSERT INTO exam_time_at_or_above (day, study_instance_uid, threshold, seconds)
    SELECT s.day, s.study_instance_uid, t.threshold,
           iif((SELECT count(*) = count(i.id)
                FROM exam_timeline tl
                LEFT JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                                     AND i.study_instance_uid = tl.study_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid),
               (SELECT coalesce(sum(iif(CASE s.governing_index WHEN 'tis' THEN i.tis
                                             WHEN 'tib' THEN i.tib WHEN 'tic' THEN i.tic END
                                        >= t.threshold, tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid),
               NULL)
    FROM exam_summaries s
    CROSS JOIN ti_thresholds t
    WHERE s.study_instance_uid = NEW.study_instance_uid;
END;

-- What the period queries read of each exam (as in migration 005, without
-- the time columns: sql/queries/reports/stats_exam_time_at_or_above.sql reads the
-- times by threshold).
CREATE VIEW exam_period_rows AS
SELECT s.day,
       s.study_instance_uid,
       s.first_acquired_at,
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
       coalesce(CASE WHEN s.measured_policy IS (SELECT version FROM policies
                                                 ORDER BY first_loaded_at DESC, rowid DESC
                                                 LIMIT 1)
                     THEN s.measured_seconds
                     ELSE (SELECT m.estimated_seconds FROM exam_measurements m
                           WHERE m.study_instance_uid = s.study_instance_uid
                             AND m.policy_version = (SELECT version FROM policies
                                                     ORDER BY first_loaded_at DESC,
                                                              rowid DESC LIMIT 1)) END,
                s.estimated_seconds) AS estimated_seconds,
       s.captures,
       s.indexed_count,
       s.finding_count
FROM exam_summaries s;

-- The policy group of each exam (exam_group_name(): "general",
-- "obstetric", ...), as the site's exam type gave it when the exam record
-- was last built; the dashboard chooses the limits to draw by it. NULL
-- for exams built before this version until they are built again (the
-- next object of the study, or `mitilog rescore`).
ALTER TABLE exams ADD COLUMN exam_group TEXT;

-- What each policy sets for exams of each group and age group, as a JSON
-- array built by SQLite's JSON functions when the policy is registered
-- (sql/queries/findings/policy_limits_append.sql); /api/v1/policy serves it.
ALTER TABLE policies ADD COLUMN limits_json TEXT NOT NULL DEFAULT '[]'
    CHECK (json_valid(limits_json));

PRAGMA user_version = 6;
