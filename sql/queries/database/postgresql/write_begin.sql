-- PostgreSQL: group commit, one write transaction per batch of queued
-- records. SQLite's IMMEDIATE (take the write lock at once) has no
-- counterpart: PostgreSQL locks rows as they are written.
BEGIN;
