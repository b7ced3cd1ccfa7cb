-- One profile of a key: the given version, or (version 0) the active one,
-- else the newest.
SELECT version, state, profile_text, coalesce(report, ''), example_image
FROM screen_profiles
WHERE profile_key = :profile_key AND (:version = 0 OR version = :version)
ORDER BY (state = 'active') DESC, version DESC
LIMIT 1;
