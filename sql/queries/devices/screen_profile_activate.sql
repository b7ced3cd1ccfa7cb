-- Activates one version of a key, recording who confirmed it and when.
UPDATE screen_profiles
SET state = 'active', confirmed_by = :confirmed_by,
    confirmed_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now'), retired_at = NULL
WHERE profile_key = :profile_key AND version = :version;
