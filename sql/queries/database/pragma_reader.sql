-- Read connection settings (the connection is also opened read-only).
PRAGMA foreign_keys = ON;
PRAGMA query_only = ON;
-- 16 MiB of page cache (default 2 MiB): the exam worker and the period
-- views re-read the same pages.
PRAGMA cache_size = -16384;
