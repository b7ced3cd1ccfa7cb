-- Foreign keys off while migrations rebuild tables (store_migrate); a
-- no-op inside a transaction, so it runs before the first one.
PRAGMA foreign_keys = OFF;
