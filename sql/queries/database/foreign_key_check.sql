-- One row per reference that a migration left dangling (store_migrate
-- fails the migration when there is any).
PRAGMA foreign_key_check;
