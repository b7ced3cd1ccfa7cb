-- 005_query_indexes.sql - what the period views read (statistics for a
-- period, weekly outliers, drift; sql/queries/stats_*.sql): one row per
-- exam in exam_summaries, kept exact by the triggers below, so that a
-- period is one range scan by day instead of a walk over every instance
-- and timeline row of the period (docs/performance.md, "Query latency"),
-- read through the view exam_period_rows.
--
-- Each summary row holds, for its exam:
--   - copies of the exam record (exams) and of its context (exam_context);
--   - what needs its instances: the first instance (by acquisition time,
--     else receipt time, then id) and its room, preset, shift, transducer
--     and Study Description; captures (image, multi-frame and volume
--     objects) and those of them with at least one index; the earliest
--     receipt time; the day;
--   - the estimated seconds of the current policy's measurement (the
--     policy loaded last), with the policy version it belongs to;
--   - the non-superseded findings;
--   - time at or above each governing TI threshold (0.7, 1.0, 1.5, 2.0),
--     summed over the exam timeline in position order. NULL when not
--     known to be exact ("dirty": while a timeline is being rewritten, or
--     when the timeline refers to an instance that is not, or no longer,
--     in the study); the queries then compute it from the timeline.
--
-- Every statement that changes one of those inputs refreshes or updates
-- the rows it affects in the same statement (triggers), so a reader never
-- sees a summary that disagrees with the tables it summarises. Rules that
-- keep the dwell sums exact without a timeline index on instances:
--   - a clean (non-NULL) dwell implies every timeline row of the exam
--     refers to an instance of the same study;
--   - so a new instance never changes a clean dwell; an updated or deleted
--     instance can only change the dwell of its old and new study, which
--     are refreshed;
--   - a timeline row inserted before the exam's last position
--     (exams.timed_count) makes the dwell dirty; the last one refreshes it
--     (store_write_exam rewrites a timeline in position order after the
--     exam record); a deleted or updated row makes it dirty or refreshes.

CREATE INDEX exams_first_acquired ON exams (first_acquired_at);

CREATE TABLE exam_summaries (
    day                 TEXT NOT NULL,  -- 'YYYY-MM-DD'; '' when unknown
    study_instance_uid  TEXT NOT NULL,
    first_acquired_at   TEXT,
    exam_type           TEXT,
    exam_type_label     TEXT,
    governing_index     TEXT NOT NULL,
    max_governing       REAL,
    max_mi              REAL,
    estimated_seconds   REAL NOT NULL,
    first_key           TEXT,           -- coalesce(acquired_at, received_at)
    first_id            INTEGER,
    first_room          TEXT,
    first_preset        TEXT,
    first_shift         TEXT,
    first_transducer    TEXT,
    study_description   TEXT,
    context_room        TEXT,
    context_preset      TEXT,
    context_shift       TEXT,
    context_transducer  TEXT,
    measured_policy     TEXT,
    measured_seconds    REAL,
    min_received_at     TEXT,
    captures            INTEGER NOT NULL,
    indexed_count       INTEGER NOT NULL,
    finding_count       INTEGER NOT NULL,
    s07 REAL, s10 REAL, s15 REAL, s20 REAL,
    PRIMARY KEY (day, study_instance_uid)
) STRICT, WITHOUT ROWID;

CREATE UNIQUE INDEX exam_summaries_study ON exam_summaries (study_instance_uid);
-- The exams with findings by day (a few in a hundred): a period's findings
-- by rule and their policy versions walk these, not every exam.
CREATE INDEX exam_summaries_with_findings ON exam_summaries (day) WHERE finding_count > 0;

-- What the period queries read of each exam (stats_exam_rows.sql,
-- stats_exam_values.sql): the summary with context from exam_context when
-- the policy engine has written it, else from the first instance;
-- estimated seconds of the current policy's measurement when there is
-- one, else of the exam record; dwell sums from the timeline when the
-- summary's are not known (the same sums the refresh makes). A view, so a
-- query computes only the columns it selects.
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
       coalesce(s.s07, (SELECT coalesce(sum(iif(
                    CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                           WHEN 'tic' THEN i.tic END >= 0.7,
                    tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid)) AS s07,
       coalesce(s.s10, (SELECT coalesce(sum(iif(
                    CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                           WHEN 'tic' THEN i.tic END >= 1.0,
                    tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid)) AS s10,
       coalesce(s.s15, (SELECT coalesce(sum(iif(
                    CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                           WHEN 'tic' THEN i.tic END >= 1.5,
                    tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid)) AS s15,
       coalesce(s.s20, (SELECT coalesce(sum(iif(
                    CASE s.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                           WHEN 'tic' THEN i.tic END >= 2.0,
                    tl.attributed_seconds, 0)), 0)
                FROM exam_timeline tl
                CROSS JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                WHERE tl.study_instance_uid = s.study_instance_uid)) AS s20,
       s.captures,
       s.indexed_count,
       s.finding_count
FROM exam_summaries s;

-- Procedures: inserting a Study Instance UID into these views runs their
-- INSTEAD OF trigger; nothing is stored in them.

-- Dwell sums of one exam from its timeline, or NULL when a timeline row
-- refers to an instance that is missing or in another study.
CREATE VIEW exam_summary_dwell_refresh (study_instance_uid) AS SELECT NULL WHERE 0;
CREATE TRIGGER exam_summary_dwell_refresh_run INSTEAD OF INSERT ON exam_summary_dwell_refresh
BEGIN
    UPDATE exam_summaries SET (s07, s10, s15, s20) = (
        SELECT
        iif(count(*) = count(i.id),
            coalesce(sum(iif(CASE g.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                  WHEN 'tic' THEN i.tic END >= 0.7,
                             tl.attributed_seconds, 0)), 0), NULL),
        iif(count(*) = count(i.id),
            coalesce(sum(iif(CASE g.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                  WHEN 'tic' THEN i.tic END >= 1.0,
                             tl.attributed_seconds, 0)), 0), NULL),
        iif(count(*) = count(i.id),
            coalesce(sum(iif(CASE g.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                  WHEN 'tic' THEN i.tic END >= 1.5,
                             tl.attributed_seconds, 0)), 0), NULL),
        iif(count(*) = count(i.id),
            coalesce(sum(iif(CASE g.governing_index WHEN 'tis' THEN i.tis WHEN 'tib' THEN i.tib
                                  WHEN 'tic' THEN i.tic END >= 2.0,
                             tl.attributed_seconds, 0)), 0), NULL)
        FROM (SELECT governing_index FROM exams
              WHERE study_instance_uid = NEW.study_instance_uid) AS g
        CROSS JOIN exam_timeline tl
        LEFT JOIN instances i ON i.sop_instance_uid = tl.sop_instance_uid
                             AND i.study_instance_uid = tl.study_instance_uid
        WHERE tl.study_instance_uid = NEW.study_instance_uid)
    WHERE study_instance_uid = NEW.study_instance_uid;
END;

-- The whole summary row of one exam (none when the exam does not exist).
CREATE VIEW exam_summary_refresh (study_instance_uid) AS SELECT NULL WHERE 0;
CREATE TRIGGER exam_summary_refresh_run INSTEAD OF INSERT ON exam_summary_refresh
BEGIN
    DELETE FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid;
    INSERT INTO exam_summaries (
        day, study_instance_uid, first_acquired_at, exam_type, exam_type_label,
        governing_index, max_governing, max_mi, estimated_seconds,
        first_key, first_id, first_room, first_preset, first_shift, first_transducer,
        study_description, context_room, context_preset, context_shift,
        context_transducer, measured_policy, measured_seconds, min_received_at,
        captures, indexed_count, finding_count)
    SELECT coalesce(substr(coalesce(e.first_acquired_at, k.min_received_at), 1, 10), ''),
           e.study_instance_uid, e.first_acquired_at, e.exam_type, e.exam_type_label,
           e.governing_index,
           CASE e.governing_index WHEN 'tis' THEN e.max_tis WHEN 'tib' THEN e.max_tib
                                  WHEN 'tic' THEN e.max_tic END,
           e.max_mi, e.estimated_seconds,
           coalesce(f.acquired_at, f.received_at), f.id, f.room, f.preset, f.shift,
           f.transducer_data, f.study_description,
           c.room, c.preset, c.shift, c.transducer,
           p.version,
           (SELECT m.estimated_seconds FROM exam_measurements m
            WHERE m.study_instance_uid = e.study_instance_uid AND m.policy_version = p.version),
           k.min_received_at, coalesce(k.captures, 0), coalesce(k.indexed, 0),
           (SELECT count(*) FROM findings x
            WHERE x.study_instance_uid = e.study_instance_uid AND x.superseded = 0)
    FROM exams e
    CROSS JOIN (SELECT sum(j.object_kind IN ('image', 'multiframe', 'volume')) AS captures,
                       sum(j.object_kind IN ('image', 'multiframe', 'volume')
                           AND (j.mi IS NOT NULL OR j.tis IS NOT NULL OR j.tib IS NOT NULL
                                OR j.tic IS NOT NULL)) AS indexed,
                       min(j.received_at) AS min_received_at
                FROM instances j WHERE j.study_instance_uid = NEW.study_instance_uid) AS k
    LEFT JOIN (SELECT version FROM policies
               ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1) AS p
    LEFT JOIN exam_context c ON c.study_instance_uid = e.study_instance_uid
    LEFT JOIN instances f ON f.id = (SELECT j.id FROM instances j
                                     WHERE j.study_instance_uid = e.study_instance_uid
                                     ORDER BY coalesce(j.acquired_at, j.received_at), j.id
                                     LIMIT 1)
    WHERE e.study_instance_uid = NEW.study_instance_uid;
    INSERT INTO exam_summary_dwell_refresh VALUES (NEW.study_instance_uid);
END;

-- exams: a rebuilt exam record (store_write_exam: after its old timeline
-- is deleted, before the new one is written).
CREATE TRIGGER exam_summaries_exam_insert AFTER INSERT ON exams
BEGIN
    INSERT INTO exam_summary_refresh VALUES (NEW.study_instance_uid);
END;
-- A rewritten exam record: its own columns, and its dwell sums when the
-- governing index changed or the timeline is empty (a rebuild deletes it
-- first); what comes from instances is kept by their triggers.
CREATE TRIGGER exam_summaries_exam_update AFTER UPDATE ON exams
BEGIN
    INSERT INTO exam_summary_refresh SELECT OLD.study_instance_uid
        WHERE NEW.study_instance_uid IS NOT OLD.study_instance_uid;
    INSERT INTO exam_summary_refresh SELECT NEW.study_instance_uid
        WHERE NEW.study_instance_uid IS NOT OLD.study_instance_uid
           OR NOT EXISTS (SELECT 1 FROM exam_summaries
                          WHERE study_instance_uid = NEW.study_instance_uid);
    UPDATE exam_summaries SET
        day = coalesce(substr(coalesce(NEW.first_acquired_at, min_received_at), 1, 10), ''),
        first_acquired_at = NEW.first_acquired_at,
        exam_type = NEW.exam_type,
        exam_type_label = NEW.exam_type_label,
        governing_index = NEW.governing_index,
        max_governing = CASE NEW.governing_index WHEN 'tis' THEN NEW.max_tis
                        WHEN 'tib' THEN NEW.max_tib WHEN 'tic' THEN NEW.max_tic END,
        max_mi = NEW.max_mi,
        estimated_seconds = NEW.estimated_seconds
    WHERE study_instance_uid = NEW.study_instance_uid
      AND NEW.study_instance_uid IS OLD.study_instance_uid;
    INSERT INTO exam_summary_dwell_refresh SELECT NEW.study_instance_uid
        WHERE NEW.study_instance_uid IS OLD.study_instance_uid
          AND (NEW.governing_index IS NOT OLD.governing_index
               OR NOT EXISTS (SELECT 1 FROM exam_timeline
                              WHERE study_instance_uid = NEW.study_instance_uid));
END;
CREATE TRIGGER exam_summaries_exam_delete AFTER DELETE ON exams
BEGIN
    DELETE FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid;
END;

-- exam_timeline
CREATE TRIGGER exam_summaries_timeline_insert AFTER INSERT ON exam_timeline
BEGIN
    UPDATE exam_summaries SET s07 = NULL, s10 = NULL, s15 = NULL, s20 = NULL
    WHERE study_instance_uid = NEW.study_instance_uid AND s07 IS NOT NULL
      AND NEW.position IS NOT (SELECT e.timed_count FROM exams e
                               WHERE e.study_instance_uid = NEW.study_instance_uid);
    INSERT INTO exam_summary_dwell_refresh SELECT NEW.study_instance_uid
        WHERE NEW.position = (SELECT e.timed_count FROM exams e
                              WHERE e.study_instance_uid = NEW.study_instance_uid);
END;
CREATE TRIGGER exam_summaries_timeline_delete AFTER DELETE ON exam_timeline
BEGIN
    UPDATE exam_summaries SET s07 = NULL, s10 = NULL, s15 = NULL, s20 = NULL
    WHERE study_instance_uid = OLD.study_instance_uid AND s07 IS NOT NULL;
END;
CREATE TRIGGER exam_summaries_timeline_update AFTER UPDATE ON exam_timeline
BEGIN
    INSERT INTO exam_summary_dwell_refresh VALUES (OLD.study_instance_uid);
    INSERT INTO exam_summary_dwell_refresh SELECT NEW.study_instance_uid
        WHERE NEW.study_instance_uid IS NOT OLD.study_instance_uid;
END;

-- instances: a new instance adds to its exam's counts and may be its
-- first; it cannot be in a clean timeline (see above). An updated or
-- deleted one refreshes its old and new exam.
CREATE TRIGGER exam_summaries_instance_insert AFTER INSERT ON instances
BEGIN
    UPDATE exam_summaries SET
        captures = captures + (NEW.object_kind IN ('image', 'multiframe', 'volume')),
        indexed_count = indexed_count
            + (NEW.object_kind IN ('image', 'multiframe', 'volume')
               AND (NEW.mi IS NOT NULL OR NEW.tis IS NOT NULL OR NEW.tib IS NOT NULL
                    OR NEW.tic IS NOT NULL)),
        min_received_at = iif(min_received_at IS NULL OR NEW.received_at < min_received_at,
                              NEW.received_at, min_received_at),
        day = coalesce(substr(coalesce(first_acquired_at,
                                       iif(min_received_at IS NULL
                                           OR NEW.received_at < min_received_at,
                                           NEW.received_at, min_received_at)), 1, 10), ''),
        first_key = iif((first_id IS NULL OR coalesce(NEW.acquired_at, NEW.received_at) < first_key
                     OR (coalesce(NEW.acquired_at, NEW.received_at) = first_key
                         AND NEW.id < first_id)),
                 coalesce(NEW.acquired_at, NEW.received_at), first_key),
        first_id = iif((first_id IS NULL OR coalesce(NEW.acquired_at, NEW.received_at) < first_key
                     OR (coalesce(NEW.acquired_at, NEW.received_at) = first_key
                         AND NEW.id < first_id)),
                 NEW.id, first_id),
        first_room = iif((first_id IS NULL OR coalesce(NEW.acquired_at, NEW.received_at) < first_key
                     OR (coalesce(NEW.acquired_at, NEW.received_at) = first_key
                         AND NEW.id < first_id)),
                 NEW.room, first_room),
        first_preset = iif((first_id IS NULL OR coalesce(NEW.acquired_at, NEW.received_at) < first_key
                     OR (coalesce(NEW.acquired_at, NEW.received_at) = first_key
                         AND NEW.id < first_id)),
                 NEW.preset, first_preset),
        first_shift = iif((first_id IS NULL OR coalesce(NEW.acquired_at, NEW.received_at) < first_key
                     OR (coalesce(NEW.acquired_at, NEW.received_at) = first_key
                         AND NEW.id < first_id)),
                 NEW.shift, first_shift),
        first_transducer = iif((first_id IS NULL OR coalesce(NEW.acquired_at, NEW.received_at) < first_key
                     OR (coalesce(NEW.acquired_at, NEW.received_at) = first_key
                         AND NEW.id < first_id)),
                 NEW.transducer_data, first_transducer),
        study_description = iif((first_id IS NULL OR coalesce(NEW.acquired_at, NEW.received_at) < first_key
                     OR (coalesce(NEW.acquired_at, NEW.received_at) = first_key
                         AND NEW.id < first_id)),
                 NEW.study_description, study_description)
    WHERE study_instance_uid = NEW.study_instance_uid;
END;
CREATE TRIGGER exam_summaries_instance_update
AFTER UPDATE OF study_instance_uid, sop_instance_uid, object_kind, mi, tis, tib, tic,
                acquired_at, received_at, room, preset, shift, transducer_data,
                study_description ON instances
BEGIN
    INSERT INTO exam_summary_refresh VALUES (OLD.study_instance_uid);
    INSERT INTO exam_summary_refresh SELECT NEW.study_instance_uid
        WHERE NEW.study_instance_uid IS NOT OLD.study_instance_uid;
END;
CREATE TRIGGER exam_summaries_instance_delete AFTER DELETE ON instances
BEGIN
    INSERT INTO exam_summary_refresh VALUES (OLD.study_instance_uid);
END;

-- exam_context
CREATE TRIGGER exam_summaries_context_insert AFTER INSERT ON exam_context
BEGIN
    UPDATE exam_summaries SET context_room = NEW.room, context_preset = NEW.preset,
                              context_shift = NEW.shift, context_transducer = NEW.transducer
    WHERE study_instance_uid = NEW.study_instance_uid;
END;
CREATE TRIGGER exam_summaries_context_update
AFTER UPDATE OF study_instance_uid, room, preset, shift, transducer ON exam_context
BEGIN
    UPDATE exam_summaries SET context_room = NULL, context_preset = NULL,
                              context_shift = NULL, context_transducer = NULL
    WHERE study_instance_uid = OLD.study_instance_uid
      AND OLD.study_instance_uid IS NOT NEW.study_instance_uid;
    UPDATE exam_summaries SET context_room = NEW.room, context_preset = NEW.preset,
                              context_shift = NEW.shift, context_transducer = NEW.transducer
    WHERE study_instance_uid = NEW.study_instance_uid
      AND (context_room IS NOT NEW.room OR context_preset IS NOT NEW.preset
           OR context_shift IS NOT NEW.shift OR context_transducer IS NOT NEW.transducer);
END;
CREATE TRIGGER exam_summaries_context_delete AFTER DELETE ON exam_context
BEGIN
    UPDATE exam_summaries SET context_room = NULL, context_preset = NULL,
                              context_shift = NULL, context_transducer = NULL
    WHERE study_instance_uid = OLD.study_instance_uid;
END;

-- exam_measurements: the current policy's estimated seconds.
CREATE VIEW exam_summary_measured_refresh (study_instance_uid) AS SELECT NULL WHERE 0;
CREATE TRIGGER exam_summary_measured_refresh_run
INSTEAD OF INSERT ON exam_summary_measured_refresh
BEGIN
    UPDATE exam_summaries SET (measured_policy, measured_seconds) = (
        SELECT p.version,
               (SELECT m.estimated_seconds FROM exam_measurements m
                WHERE m.study_instance_uid = NEW.study_instance_uid
                  AND m.policy_version = p.version)
        FROM (SELECT NULL) LEFT JOIN (SELECT version FROM policies
                                      ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1) AS p)
    WHERE study_instance_uid = NEW.study_instance_uid;
END;
CREATE TRIGGER exam_summaries_measurement_insert AFTER INSERT ON exam_measurements
BEGIN
    INSERT INTO exam_summary_measured_refresh VALUES (NEW.study_instance_uid);
END;
CREATE TRIGGER exam_summaries_measurement_update
AFTER UPDATE OF study_instance_uid, policy_version, estimated_seconds ON exam_measurements
BEGIN
    INSERT INTO exam_summary_measured_refresh VALUES (OLD.study_instance_uid);
    INSERT INTO exam_summary_measured_refresh SELECT NEW.study_instance_uid
        WHERE NEW.study_instance_uid IS NOT OLD.study_instance_uid;
END;
CREATE TRIGGER exam_summaries_measurement_delete AFTER DELETE ON exam_measurements
BEGIN
    INSERT INTO exam_summary_measured_refresh VALUES (OLD.study_instance_uid);
END;

-- policies: a change of the current policy re-reads every exam's
-- measurement (rare: a new policy version).
CREATE VIEW exam_summary_policy_refresh (unused) AS SELECT NULL WHERE 0;
CREATE TRIGGER exam_summary_policy_refresh_run INSTEAD OF INSERT ON exam_summary_policy_refresh
BEGIN
    INSERT INTO exam_summary_measured_refresh
    SELECT study_instance_uid FROM exam_summaries
    WHERE measured_policy IS NOT (SELECT version FROM policies
                                  ORDER BY first_loaded_at DESC, rowid DESC LIMIT 1);
END;
CREATE TRIGGER exam_summaries_policy_insert AFTER INSERT ON policies
BEGIN
    INSERT INTO exam_summary_policy_refresh VALUES (NULL);
END;
CREATE TRIGGER exam_summaries_policy_update AFTER UPDATE OF version, first_loaded_at ON policies
BEGIN
    INSERT INTO exam_summary_policy_refresh VALUES (NULL);
END;
CREATE TRIGGER exam_summaries_policy_delete AFTER DELETE ON policies
BEGIN
    INSERT INTO exam_summary_policy_refresh VALUES (NULL);
END;

-- findings: the exam's non-superseded findings.
CREATE VIEW exam_summary_findings_refresh (study_instance_uid) AS SELECT NULL WHERE 0;
CREATE TRIGGER exam_summary_findings_refresh_run
INSTEAD OF INSERT ON exam_summary_findings_refresh
BEGIN
    UPDATE exam_summaries SET finding_count = (
        SELECT count(*) FROM findings x
        WHERE x.study_instance_uid = NEW.study_instance_uid AND x.superseded = 0)
    WHERE study_instance_uid = NEW.study_instance_uid;
END;
CREATE TRIGGER exam_summaries_finding_insert AFTER INSERT ON findings
WHEN NEW.study_instance_uid IS NOT NULL
BEGIN
    INSERT INTO exam_summary_findings_refresh VALUES (NEW.study_instance_uid);
END;
CREATE TRIGGER exam_summaries_finding_update
AFTER UPDATE OF study_instance_uid, superseded ON findings
BEGIN
    INSERT INTO exam_summary_findings_refresh SELECT OLD.study_instance_uid
        WHERE OLD.study_instance_uid IS NOT NULL;
    INSERT INTO exam_summary_findings_refresh SELECT NEW.study_instance_uid
        WHERE NEW.study_instance_uid IS NOT NULL
          AND NEW.study_instance_uid IS NOT OLD.study_instance_uid;
END;
CREATE TRIGGER exam_summaries_finding_delete AFTER DELETE ON findings
WHEN OLD.study_instance_uid IS NOT NULL
BEGIN
    INSERT INTO exam_summary_findings_refresh VALUES (OLD.study_instance_uid);
END;

-- The exams already held.
INSERT INTO exam_summary_refresh SELECT study_instance_uid FROM exams;

PRAGMA user_version = 5;
