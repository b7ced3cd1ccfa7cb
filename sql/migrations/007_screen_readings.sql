-- 007_screen_readings.sql - the indices read from the pixels of a capture
-- (the text a scanner burns into the image), and the durable queue of the
-- objects waiting to be read.
--
-- A C-STORE is answered once the instance's row has committed; reading
-- the pixels comes after, on the reading workers. An object that needs
-- reading gets, in the same transaction as its instance row, a
-- reading_queue row naming the file to read (a copy under the data
-- folder's reading/ spool, or the kept object / imported file) and a
-- screen_readings row in state 'queued'. So an object acknowledged but
-- not yet read is never lost: after a crash the queue rows are read
-- again at start. Reading writes the values, sets the state to 'read' or
-- 'not_read' and deletes the queue row, in one transaction.
--
-- An object that needs reading but finds the queue full gets no queue
-- row: its state is 'not_read' with the reason, and `mitilog rescore
-- --read-pixels` reads it later when retention kept the object.
--
-- A re-sent instance replaces both rows (what is kept belongs to the
-- latest receipt).

CREATE TABLE reading_queue (
    instance_id  INTEGER PRIMARY KEY REFERENCES instances (id) ON DELETE CASCADE,
    path         TEXT NOT NULL,        -- the file to read
    owned        INTEGER NOT NULL CHECK (owned = 0 OR owned = 1),  -- 1: a spool copy,
                                       -- deleted once read
    bytes        INTEGER NOT NULL CHECK (bytes >= 0),
    queued_at    TEXT NOT NULL         -- ISO 8601 UTC
) STRICT;

-- One row per instance that needed reading. Per index: the value read
-- (REAL, only when its status is 'read'), its status ('read': what the
-- screen showed; 'not_read': nothing certain, see the reason;
-- 'not_shown': the device's profile says it does not draw this index;
-- NULL: not read yet), the characters read, the decimals drawn and the
-- reason when not read.
CREATE TABLE screen_readings (
    instance_id      INTEGER PRIMARY KEY REFERENCES instances (id) ON DELETE CASCADE,
    state            TEXT NOT NULL
        CHECK (state = 'queued' OR state = 'read' OR state = 'not_read'),
    reason           TEXT,             -- whole-object reason when not read
    profile_key      TEXT,
    profile_version  INTEGER,
    frames_read      INTEGER NOT NULL DEFAULT 0,
    updated_at       TEXT NOT NULL,    -- ISO 8601 UTC
    mi REAL, mi_status TEXT, mi_text TEXT, mi_decimals INTEGER, mi_reason TEXT,
    tis REAL, tis_status TEXT, tis_text TEXT, tis_decimals INTEGER, tis_reason TEXT,
    tib REAL, tib_status TEXT, tib_text TEXT, tib_decimals INTEGER, tib_reason TEXT,
    tic REAL, tic_status TEXT, tic_text TEXT, tic_decimals INTEGER, tic_reason TEXT,
    tis_focus REAL, tis_focus_status TEXT, tis_focus_text TEXT, tis_focus_decimals INTEGER,
    tis_focus_reason TEXT,
    tis_surface REAL, tis_surface_status TEXT, tis_surface_text TEXT,
    tis_surface_decimals INTEGER, tis_surface_reason TEXT,
    CHECK ((mi IS NOT NULL) = (mi_status IS NOT NULL AND mi_status = 'read')),
    CHECK ((tis IS NOT NULL) = (tis_status IS NOT NULL AND tis_status = 'read')),
    CHECK ((tib IS NOT NULL) = (tib_status IS NOT NULL AND tib_status = 'read')),
    CHECK ((tic IS NOT NULL) = (tic_status IS NOT NULL AND tic_status = 'read')),
    CHECK ((tis_focus IS NOT NULL) = (tis_focus_status IS NOT NULL AND tis_focus_status = 'read')),
    CHECK ((tis_surface IS NOT NULL)
           = (tis_surface_status IS NOT NULL AND tis_surface_status = 'read'))
) STRICT;

CREATE INDEX screen_readings_state ON screen_readings (state);

-- Which source a rule uses when an index was both in the header and read
-- from the screen: the policy's index_source ([policy] index_source in
-- policy.ini, docs/policy.md), written here when a policy is registered,
-- so that every reader of the database (the API, reports, rescore) uses
-- the same one. 'screen' (the default): what the operator saw.
CREATE TABLE index_source_setting (
    only_row   INTEGER PRIMARY KEY CHECK (only_row = 1),
    preferred  TEXT NOT NULL CHECK (preferred = 'screen' OR preferred = 'header')
) STRICT;
INSERT INTO index_source_setting (only_row, preferred) VALUES (1, 'screen');

-- Per instance, each index with its provenance (docs/api.md, "Index
-- provenance"): the value the rules use and from where ('used'), where it
-- was found ('source': header, pixels or both), whether header and screen
-- agree within the screen's rounding (half a unit of the last decimal
-- drawn), and both sides as recorded; and the state of the pixel reading.
CREATE VIEW instance_provenance AS
SELECT i.id AS instance_id,
    json_object(
        'mi', json_object(
            'value', CASE WHEN (s.mi_status IS NOT NULL AND s.mi_status = 'read' AND (p.preferred = 'screen' OR i.mi_status <> 'ok')) THEN s.mi ELSE i.mi END,
            'used', CASE WHEN (s.mi_status IS NOT NULL AND s.mi_status = 'read' AND (p.preferred = 'screen' OR i.mi_status <> 'ok')) THEN 'screen' WHEN i.mi_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.mi_status = 'ok' AND s.mi_status IS NOT NULL AND s.mi_status = 'read') THEN 'both'
                           WHEN i.mi_status = 'ok' THEN 'header'
                           WHEN s.mi_status IS NOT NULL AND s.mi_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.mi_status = 'ok' AND s.mi_status IS NOT NULL AND s.mi_status = 'read')
                          THEN json(iif(abs(i.mi - s.mi) <= CASE s.mi_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.mi, 'status', i.mi_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.mi, 'status', s.mi_status, 'text', s.mi_text,
                'decimals', s.mi_decimals, 'reason', s.mi_reason))),
        'tis', json_object(
            'value', CASE WHEN (s.tis_status IS NOT NULL AND s.tis_status = 'read' AND (p.preferred = 'screen' OR i.tis_status <> 'ok')) THEN s.tis ELSE i.tis END,
            'used', CASE WHEN (s.tis_status IS NOT NULL AND s.tis_status = 'read' AND (p.preferred = 'screen' OR i.tis_status <> 'ok')) THEN 'screen' WHEN i.tis_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tis_status = 'ok' AND s.tis_status IS NOT NULL AND s.tis_status = 'read') THEN 'both'
                           WHEN i.tis_status = 'ok' THEN 'header'
                           WHEN s.tis_status IS NOT NULL AND s.tis_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tis_status = 'ok' AND s.tis_status IS NOT NULL AND s.tis_status = 'read')
                          THEN json(iif(abs(i.tis - s.tis) <= CASE s.tis_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tis, 'status', i.tis_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tis, 'status', s.tis_status, 'text', s.tis_text,
                'decimals', s.tis_decimals, 'reason', s.tis_reason))),
        'tib', json_object(
            'value', CASE WHEN (s.tib_status IS NOT NULL AND s.tib_status = 'read' AND (p.preferred = 'screen' OR i.tib_status <> 'ok')) THEN s.tib ELSE i.tib END,
            'used', CASE WHEN (s.tib_status IS NOT NULL AND s.tib_status = 'read' AND (p.preferred = 'screen' OR i.tib_status <> 'ok')) THEN 'screen' WHEN i.tib_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tib_status = 'ok' AND s.tib_status IS NOT NULL AND s.tib_status = 'read') THEN 'both'
                           WHEN i.tib_status = 'ok' THEN 'header'
                           WHEN s.tib_status IS NOT NULL AND s.tib_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tib_status = 'ok' AND s.tib_status IS NOT NULL AND s.tib_status = 'read')
                          THEN json(iif(abs(i.tib - s.tib) <= CASE s.tib_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tib, 'status', i.tib_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tib, 'status', s.tib_status, 'text', s.tib_text,
                'decimals', s.tib_decimals, 'reason', s.tib_reason))),
        'tic', json_object(
            'value', CASE WHEN (s.tic_status IS NOT NULL AND s.tic_status = 'read' AND (p.preferred = 'screen' OR i.tic_status <> 'ok')) THEN s.tic ELSE i.tic END,
            'used', CASE WHEN (s.tic_status IS NOT NULL AND s.tic_status = 'read' AND (p.preferred = 'screen' OR i.tic_status <> 'ok')) THEN 'screen' WHEN i.tic_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tic_status = 'ok' AND s.tic_status IS NOT NULL AND s.tic_status = 'read') THEN 'both'
                           WHEN i.tic_status = 'ok' THEN 'header'
                           WHEN s.tic_status IS NOT NULL AND s.tic_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tic_status = 'ok' AND s.tic_status IS NOT NULL AND s.tic_status = 'read')
                          THEN json(iif(abs(i.tic - s.tic) <= CASE s.tic_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tic, 'status', i.tic_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tic, 'status', s.tic_status, 'text', s.tic_text,
                'decimals', s.tic_decimals, 'reason', s.tic_reason))),
        'tis_focus', json_object(
            'value', CASE WHEN (s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read' AND (p.preferred = 'screen' OR i.tis_focus_status <> 'ok')) THEN s.tis_focus ELSE i.tis_focus END,
            'used', CASE WHEN (s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read' AND (p.preferred = 'screen' OR i.tis_focus_status <> 'ok')) THEN 'screen' WHEN i.tis_focus_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tis_focus_status = 'ok' AND s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read') THEN 'both'
                           WHEN i.tis_focus_status = 'ok' THEN 'header'
                           WHEN s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tis_focus_status = 'ok' AND s.tis_focus_status IS NOT NULL AND s.tis_focus_status = 'read')
                          THEN json(iif(abs(i.tis_focus - s.tis_focus) <= CASE s.tis_focus_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tis_focus, 'status', i.tis_focus_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tis_focus, 'status', s.tis_focus_status, 'text', s.tis_focus_text,
                'decimals', s.tis_focus_decimals, 'reason', s.tis_focus_reason))),
        'tis_surface', json_object(
            'value', CASE WHEN (s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read' AND (p.preferred = 'screen' OR i.tis_surface_status <> 'ok')) THEN s.tis_surface ELSE i.tis_surface END,
            'used', CASE WHEN (s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read' AND (p.preferred = 'screen' OR i.tis_surface_status <> 'ok')) THEN 'screen' WHEN i.tis_surface_status = 'ok' THEN 'header' END,
            'source', CASE WHEN (i.tis_surface_status = 'ok' AND s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read') THEN 'both'
                           WHEN i.tis_surface_status = 'ok' THEN 'header'
                           WHEN s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read' THEN 'pixels' END,
            'agree', CASE WHEN (i.tis_surface_status = 'ok' AND s.tis_surface_status IS NOT NULL AND s.tis_surface_status = 'read')
                          THEN json(iif(abs(i.tis_surface - s.tis_surface) <= CASE s.tis_surface_decimals WHEN 0 THEN 0.5
                              WHEN 1 THEN 0.05 WHEN 2 THEN 0.005 ELSE 0.0005 END + 1e-9,
                              'true', 'false')) END,
            'header', json_object('value', i.tis_surface, 'status', i.tis_surface_status),
            'screen', iif(s.instance_id IS NULL, NULL, json_object(
                'value', s.tis_surface, 'status', s.tis_surface_status, 'text', s.tis_surface_text,
                'decimals', s.tis_surface_decimals, 'reason', s.tis_surface_reason)))
    ) AS indices,
    iif(s.instance_id IS NULL, NULL, json_object(
        'state', s.state, 'reason', s.reason, 'profile_key', s.profile_key,
        'profile_version', s.profile_version, 'frames_read', s.frames_read,
        'updated_at', s.updated_at)) AS screen_reading
FROM instances i
JOIN index_source_setting p ON p.only_row = 1
LEFT JOIN screen_readings s ON s.instance_id = i.id;

PRAGMA user_version = 7;
