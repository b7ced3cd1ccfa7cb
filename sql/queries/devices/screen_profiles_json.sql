-- GET /api/v1/devices: every profile version, newest first per key, as a
-- JSON array; the profile text is included for the page to draw the
-- regions it names.
SELECT coalesce(json_group_array(json_object(
    'key', profile_key, 'version', version, 'state', state,
    'manufacturer', manufacturer, 'model_name', model_name,
    'software_versions', software_versions, 'rows', rows, 'columns', columns,
    'learned_at', learned_at, 'confirmed_by', confirmed_by,
    'confirmed_at', confirmed_at, 'retired_at', retired_at,
    'report', report, 'has_example', example_image IS NOT NULL,
    'profile_text', profile_text)), '[]')
FROM (SELECT * FROM screen_profiles ORDER BY profile_key, version DESC);
