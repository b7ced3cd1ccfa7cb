-- Read connection settings (the connection is also opened read-only).
PRAGMA foreign_keys = ON;
PRAGMA query_only = ON;
