-- Foreign keys back on once the migrations are applied (store_migrate).
PRAGMA foreign_keys = ON;
