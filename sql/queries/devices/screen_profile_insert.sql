-- Stores a newly learned profile as proposed (store_screen_profile_put).
-- Its version is one more than any version of the key held.
INSERT INTO screen_profiles (profile_key, version, manufacturer, model_name,
                             software_versions, rows, columns, profile_text,
                             state, learned_at, report, example_image)
VALUES (:profile_key, :version, :manufacturer, :model_name, :software_versions,
        :rows, :columns, :profile_text, 'proposed',
        strftime('%Y-%m-%dT%H:%M:%fZ', 'now'), :report, :example_image);
