-- The version a new profile of a key gets: one more than any held.
SELECT coalesce(max(version), 0) + 1 FROM screen_profiles WHERE profile_key = :profile_key;
