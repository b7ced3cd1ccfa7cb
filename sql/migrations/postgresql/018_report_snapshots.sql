-- 018_report_snapshots.sql for PostgreSQL: the tables of
-- migrations/018_report_snapshots.sql (see there for what they mean), in
-- PostgreSQL's types, and one trigger function per table in place of
-- SQLite's trigger bodies. The migration runner records the version.
CREATE TABLE data_days (
    day      text PRIMARY KEY,
    changes  bigint NOT NULL DEFAULT 0
);
INSERT INTO data_days (day, changes)
SELECT day, 1 FROM exam_summaries GROUP BY day;

CREATE TABLE report_snapshots (
    view        text NOT NULL,
    request     text NOT NULL,
    signature   text NOT NULL,
    body        text NOT NULL,
    made_at     text NOT NULL,
    made_ms     double precision NOT NULL,
    asked_at    text NOT NULL,
    PRIMARY KEY (view, request)
);
CREATE INDEX report_snapshots_asked ON report_snapshots (asked_at);

CREATE FUNCTION mitilog_data_day_changed(changed text) RETURNS void LANGUAGE sql AS $function$
    INSERT INTO data_days (day, changes) VALUES (changed, 1)
    ON CONFLICT (day) DO UPDATE SET changes = data_days.changes + 1;
$function$;

-- exam_time_at_or_above: the row's own day.
CREATE FUNCTION mitilog_data_day_row() RETURNS trigger LANGUAGE plpgsql AS $function$
BEGIN
    IF TG_OP <> 'INSERT' THEN
        PERFORM mitilog_data_day_changed(OLD.day);
    END IF;
    IF TG_OP <> 'DELETE' THEN
        PERFORM mitilog_data_day_changed(NEW.day);
    END IF;
    RETURN NULL;
END
$function$;
CREATE TRIGGER data_days_time AFTER INSERT OR UPDATE OR DELETE ON exam_time_at_or_above
    FOR EACH ROW EXECUTE FUNCTION mitilog_data_day_row();

-- exam_summaries: the row's day and the days its findings are listed
-- under.
CREATE FUNCTION mitilog_data_day_summary() RETURNS trigger LANGUAGE plpgsql AS $function$
BEGIN
    IF TG_OP <> 'INSERT' THEN
        PERFORM mitilog_data_day_changed(OLD.day);
        PERFORM mitilog_data_day_changed(d.day) FROM (
            SELECT DISTINCT substr(f.started_at, 1, 10) AS day FROM findings f
            WHERE f.study_instance_uid = OLD.study_instance_uid AND f.started_at IS NOT NULL
            ORDER BY 1) AS d;
    END IF;
    IF TG_OP <> 'DELETE' THEN
        PERFORM mitilog_data_day_changed(NEW.day);
        PERFORM mitilog_data_day_changed(d.day) FROM (
            SELECT DISTINCT substr(f.started_at, 1, 10) AS day FROM findings f
            WHERE f.study_instance_uid = NEW.study_instance_uid AND f.started_at IS NOT NULL
            ORDER BY 1) AS d;
    END IF;
    RETURN NULL;
END
$function$;
CREATE TRIGGER data_days_summary AFTER INSERT OR UPDATE OR DELETE ON exam_summaries
    FOR EACH ROW EXECUTE FUNCTION mitilog_data_day_summary();

-- findings: the day of the exam's summary, and the days the findings
-- list shows it under (its start's, its period's).
CREATE FUNCTION mitilog_data_day_finding() RETURNS trigger LANGUAGE plpgsql AS $function$
BEGIN
    IF TG_OP <> 'INSERT' THEN
        PERFORM mitilog_data_day_changed(d.day) FROM (
            SELECT s.day FROM exam_summaries s WHERE s.study_instance_uid = OLD.study_instance_uid
            UNION SELECT substr(OLD.started_at, 1, 10) WHERE OLD.started_at IS NOT NULL
            UNION SELECT substr(OLD.period, 1, 10) WHERE OLD.period IS NOT NULL
            ORDER BY 1) AS d;
    END IF;
    IF TG_OP <> 'DELETE' THEN
        PERFORM mitilog_data_day_changed(d.day) FROM (
            SELECT s.day FROM exam_summaries s WHERE s.study_instance_uid = NEW.study_instance_uid
            UNION SELECT substr(NEW.started_at, 1, 10) WHERE NEW.started_at IS NOT NULL
            UNION SELECT substr(NEW.period, 1, 10) WHERE NEW.period IS NOT NULL
            ORDER BY 1) AS d;
    END IF;
    RETURN NULL;
END
$function$;
CREATE TRIGGER data_days_finding AFTER INSERT OR UPDATE OR DELETE ON findings
    FOR EACH ROW EXECUTE FUNCTION mitilog_data_day_finding();

-- exam_measurements: the day of the exam's summary.
CREATE FUNCTION mitilog_data_day_measurement() RETURNS trigger LANGUAGE plpgsql AS $function$
BEGIN
    IF TG_OP <> 'INSERT' THEN
        PERFORM mitilog_data_day_changed(s.day) FROM exam_summaries s
        WHERE s.study_instance_uid = OLD.study_instance_uid;
    END IF;
    IF TG_OP <> 'DELETE' THEN
        PERFORM mitilog_data_day_changed(s.day) FROM exam_summaries s
        WHERE s.study_instance_uid = NEW.study_instance_uid;
    END IF;
    RETURN NULL;
END
$function$;
CREATE TRIGGER data_days_measurement AFTER INSERT OR UPDATE OR DELETE ON exam_measurements
    FOR EACH ROW EXECUTE FUNCTION mitilog_data_day_measurement();
