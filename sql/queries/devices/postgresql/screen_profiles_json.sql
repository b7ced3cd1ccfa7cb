-- PostgreSQL's screen_profiles_json.sql (docs/postgresql-dialect.md): the
-- same document, built with json_build_object (SQLite's json_object takes
-- any number of mixed arguments, which no PostgreSQL function can),
-- refusals summed and has_example written as integers (SQLite's booleans
-- are 0 and 1, PostgreSQL's true and false), the profiles' order inside
-- the aggregate.
-- GET /api/v1/devices: every profile version, newest first per key, as a
-- JSON array; the profile text is included for the page to draw the
-- regions it names.
--
-- Per version, what its frames of the last 7 days of readings
-- (screen_readings.updated_at, UTC) came to: frames read with it (or
-- refused for it: a device whose software changed is counted against
-- the profile learned on the old software), how many were refused (the
-- object, or any index it knows, "not read"), the most common reason and
-- the first acquisition among the refused. A profile that stops matching
-- shows here, never as wrong numbers. With sites asked for (migration
-- 013: :site_count, :site_1 ... :site_16), only the frames of their
-- objects are counted; the profiles themselves belong to the device.
WITH recent AS MATERIALIZED (
    SELECT r.profile_key, r.profile_version, i.acquired_at,
           -- an index left blank on this frame (the exam does not show it)
           -- is not a refusal; any other reason is
           r.state = 'not_read' OR coalesce(r.mi_reason, r.tis_reason, r.tib_reason,
                                             r.tic_reason, r.tis_focus_reason,
                                             r.tis_surface_reason) IS NOT NULL AS refused,
           coalesce(r.reason, r.mi_reason, r.tis_reason, r.tib_reason, r.tic_reason,
                    r.tis_focus_reason, r.tis_surface_reason) AS why
    FROM (SELECT instance_id, state, reason, profile_key, profile_version, updated_at,
                 iif(mi_reason LIKE 'nothing is drawn%', NULL, mi_reason) AS mi_reason,
                 iif(tis_reason LIKE 'nothing is drawn%', NULL, tis_reason) AS tis_reason,
                 iif(tib_reason LIKE 'nothing is drawn%', NULL, tib_reason) AS tib_reason,
                 iif(tic_reason LIKE 'nothing is drawn%', NULL, tic_reason) AS tic_reason,
                 iif(tis_focus_reason LIKE 'nothing is drawn%', NULL, tis_focus_reason)
                     AS tis_focus_reason,
                 iif(tis_surface_reason LIKE 'nothing is drawn%', NULL, tis_surface_reason)
                     AS tis_surface_reason
          FROM screen_readings) r
    JOIN instances i ON i.id = r.instance_id
    WHERE r.state <> 'queued' AND r.profile_key IS NOT NULL
      AND r.updated_at >= strftime('%Y-%m-%dT%H:%M:%SZ', 'now', '-7 days')
      AND (:site_count = 0 OR i.site IN (:site_1, :site_2, :site_3, :site_4, :site_5, :site_6, :site_7,
          :site_8, :site_9, :site_10, :site_11, :site_12, :site_13, :site_14, :site_15, :site_16))
),
counts AS MATERIALIZED (
    SELECT profile_key, profile_version, count(*) AS frames, sum(refused::integer) AS refused,
           min(iif(refused, acquired_at, NULL)) AS refused_since
    FROM recent GROUP BY 1, 2
),
reasons AS MATERIALIZED (
    SELECT profile_key, profile_version, why, count(*) AS n,
           row_number() OVER (PARTITION BY profile_key, profile_version
                              ORDER BY count(*) DESC, why) AS rank
    FROM recent WHERE refused GROUP BY 1, 2, 3
)
SELECT coalesce(json_group_array(json_build_object(
    'key', p.profile_key, 'version', p.version, 'state', p.state,
    'manufacturer', p.manufacturer, 'model_name', p.model_name,
    'software_versions', p.software_versions, 'rows', p.rows, 'columns', p.columns,
    'learned_at', p.learned_at, 'confirmed_by', p.confirmed_by,
    'confirmed_at', p.confirmed_at, 'retired_at', p.retired_at,
    'report', p.report, 'has_example', (p.example_image IS NOT NULL)::integer,
    'recent_frames', coalesce((SELECT frames FROM counts c WHERE c.profile_key = p.profile_key
                                AND c.profile_version = p.version), 0),
    'recent_refused', coalesce((SELECT refused FROM counts c WHERE c.profile_key = p.profile_key
                                AND c.profile_version = p.version), 0),
    'refused_reason', (SELECT why FROM reasons r WHERE r.profile_key = p.profile_key
                       AND r.profile_version = p.version AND r.rank = 1),
    'refused_reason_frames', (SELECT n FROM reasons r WHERE r.profile_key = p.profile_key
                              AND r.profile_version = p.version AND r.rank = 1),
    'refused_since', (SELECT refused_since FROM counts c WHERE c.profile_key = p.profile_key
                      AND c.profile_version = p.version),
    'profile_text', p.profile_text) ORDER BY p.profile_key, p.version DESC), '[]')
FROM screen_profiles p;
