-- 004_reserved.sql - number 4 is taken by a migration of the write side
-- that is not on this branch yet; store_open() applies migrations only in
-- an unbroken sequence, so this empty one stands in for it until it lands
-- and must then be removed (a database migrated with it is at version 5
-- without the real 004: rebuild such test databases).
PRAGMA user_version = 4;
