-- The number of the last applied migration.
PRAGMA user_version;
