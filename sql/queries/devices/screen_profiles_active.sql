-- The text of every active profile (store_screen_profiles_active).
SELECT profile_text FROM screen_profiles WHERE state = 'active' ORDER BY profile_key;
