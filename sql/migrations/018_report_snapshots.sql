-- 018_report_snapshots.sql - documents of the period views kept in the
-- database, and what tells whether one is still true.
--
-- data_days: one row per exam day ('YYYY-MM-DD' as exam_summaries.day),
-- whose change count goes up, in the writing transaction, whenever a row a
-- period view or the findings list reads for that day is inserted,
-- updated or deleted: an exam's summary, its time at or above each
-- threshold, its measurements under a policy, its findings. The
-- triggers below do it, so that no write path can forget. The sum of the
-- counts over a period's days therefore changes whenever its data does,
-- and only then.
--
-- report_snapshots: one document per view and request (the request in a
-- canonical text form, src/report/report_snapshot.c), with the signature
-- of the data it was made from; it is served while the signature read
-- now is the same, and made again otherwise.
CREATE TABLE data_days (
    day      TEXT PRIMARY KEY,
    changes  INTEGER NOT NULL DEFAULT 0
);
INSERT INTO data_days (day, changes)
SELECT day, 1 FROM exam_summaries WHERE true GROUP BY day
ON CONFLICT (day) DO NOTHING;

CREATE TABLE report_snapshots (
    view        TEXT NOT NULL,
    request     TEXT NOT NULL,
    signature   TEXT NOT NULL,
    body        TEXT NOT NULL,
    made_at     TEXT NOT NULL,   -- ISO 8601 UTC
    made_ms     REAL NOT NULL,   -- how long the document took to make
    asked_at    TEXT NOT NULL,   -- last asked for (to the hour): what the
                                 -- refresher keeps ready, what is forgotten
    PRIMARY KEY (view, request)
);
CREATE INDEX report_snapshots_asked ON report_snapshots (asked_at);

-- An exam's summary: its day, and the days its findings are listed under
-- (GET /api/v1/findings shows the exam's site; a finding's day is its
-- start's, which may be the day after the exam's when it runs past
-- midnight).
CREATE TRIGGER data_days_summary_insert AFTER INSERT ON exam_summaries
BEGIN
    INSERT INTO data_days (day, changes) VALUES (NEW.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT DISTINCT substr(started_at, 1, 10), 1 FROM findings
    WHERE study_instance_uid = NEW.study_instance_uid AND started_at IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_summary_update AFTER UPDATE ON exam_summaries
BEGIN
    INSERT INTO data_days (day, changes) VALUES (OLD.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes) VALUES (NEW.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT DISTINCT substr(started_at, 1, 10), 1 FROM findings
    WHERE study_instance_uid = OLD.study_instance_uid AND started_at IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT DISTINCT substr(started_at, 1, 10), 1 FROM findings
    WHERE study_instance_uid = NEW.study_instance_uid AND started_at IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_summary_delete AFTER DELETE ON exam_summaries
BEGIN
    INSERT INTO data_days (day, changes) VALUES (OLD.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT DISTINCT substr(started_at, 1, 10), 1 FROM findings
    WHERE study_instance_uid = OLD.study_instance_uid AND started_at IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;

-- An exam's time at or above a threshold: its day.
CREATE TRIGGER data_days_time_insert AFTER INSERT ON exam_time_at_or_above
BEGIN
    INSERT INTO data_days (day, changes) VALUES (NEW.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_time_update AFTER UPDATE ON exam_time_at_or_above
BEGIN
    INSERT INTO data_days (day, changes) VALUES (OLD.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes) VALUES (NEW.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_time_delete AFTER DELETE ON exam_time_at_or_above
BEGIN
    INSERT INTO data_days (day, changes) VALUES (OLD.day, 1)
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;

-- A finding: the day of its exam's summary (the period views join
-- findings to exam_summaries by study), and the days GET /api/v1/findings
-- lists it under (its start's, else its period's; else its exam's, which
-- is the summary's). A finding written before its exam's summary in the
-- same transaction is counted by the summary's own trigger.
CREATE TRIGGER data_days_finding_insert AFTER INSERT ON findings
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid
    UNION SELECT substr(NEW.started_at, 1, 10), 1 WHERE NEW.started_at IS NOT NULL
    UNION SELECT substr(NEW.period, 1, 10), 1 WHERE NEW.period IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_finding_update AFTER UPDATE ON findings
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid
    UNION SELECT substr(OLD.started_at, 1, 10), 1 WHERE OLD.started_at IS NOT NULL
    UNION SELECT substr(OLD.period, 1, 10), 1 WHERE OLD.period IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid
    UNION SELECT substr(NEW.started_at, 1, 10), 1 WHERE NEW.started_at IS NOT NULL
    UNION SELECT substr(NEW.period, 1, 10), 1 WHERE NEW.period IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_finding_delete AFTER DELETE ON findings
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid
    UNION SELECT substr(OLD.started_at, 1, 10), 1 WHERE OLD.started_at IS NOT NULL
    UNION SELECT substr(OLD.period, 1, 10), 1 WHERE OLD.period IS NOT NULL
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;

-- An exam's measurements under a policy (the estimated time the period
-- views show under the current policy): the day of its exam's summary.
CREATE TRIGGER data_days_measurement_insert AFTER INSERT ON exam_measurements
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_measurement_update AFTER UPDATE ON exam_measurements
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = NEW.study_instance_uid
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;
CREATE TRIGGER data_days_measurement_delete AFTER DELETE ON exam_measurements
BEGIN
    INSERT INTO data_days (day, changes)
    SELECT day, 1 FROM exam_summaries WHERE study_instance_uid = OLD.study_instance_uid
    ON CONFLICT (day) DO UPDATE SET changes = changes + 1;
END;

PRAGMA user_version = 18;
