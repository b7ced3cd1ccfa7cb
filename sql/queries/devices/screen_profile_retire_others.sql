-- Before a version is activated: the active version of its key, if any
-- other, is retired.
UPDATE screen_profiles
SET state = 'retired', retired_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
WHERE profile_key = :profile_key AND state = 'active' AND version <> :version;
