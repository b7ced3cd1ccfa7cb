-- 005_query_indexes.sql - what the period views read (statistics for a
-- period, weekly outliers, drift; sql/queries/stats_*.sql): one row per
-- exam in exam_summaries, so that a period is one range scan by day
-- instead of a walk over every instance and timeline row of the period
-- (docs/performance.md, "Query latency"), read through the view
-- exam_period_rows.
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
--     summed over the exam timeline. NULL when a timeline row refers to an
--     instance that is not, or no longer, in the study; the queries then
--     compute it from the timeline.
--
-- When it is written: the store refreshes an exam's row in the
-- transaction that writes the exam (its record, and its evaluation when
-- there is a policy: sql/queries/exam_summary_refresh.sql, from
-- store_write.c), so a summary is exactly what the tables held when its
-- exam was last written, and it follows the instances as the exam record
-- does (the exam worker rebuilds an exam once its burst of objects has
-- settled). A new current policy re-reads every row's measurement
-- (trigger below). Row triggers on instances and timelines would keep
-- the summaries current between rebuilds too, but they cost every
-- received object more than its own row did.

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
    CROSS JOIN (SELECT sum(j.object_kind = 'image' OR j.object_kind = 'multiframe'
                           OR j.object_kind = 'volume') AS captures,
                       sum((j.object_kind = 'image' OR j.object_kind = 'multiframe'
                            OR j.object_kind = 'volume')
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

-- An exam deleted: its summary with it (mitilog does not delete exams;
-- a tool that does keeps this table right).
CREATE TRIGGER exam_summaries_exam_delete AFTER DELETE ON exams
BEGIN
    DELETE FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid;
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

-- The exams already held.
INSERT INTO exam_summary_refresh SELECT study_instance_uid FROM exams;

PRAGMA user_version = 5;
