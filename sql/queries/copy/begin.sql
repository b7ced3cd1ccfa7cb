-- One transaction per table copied.
BEGIN;
