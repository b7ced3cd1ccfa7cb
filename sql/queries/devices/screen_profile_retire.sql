-- Retires every proposed or active version of a key.
UPDATE screen_profiles
SET state = 'retired', retired_at = strftime('%Y-%m-%dT%H:%M:%fZ', 'now')
WHERE profile_key = :profile_key AND state <> 'retired';
