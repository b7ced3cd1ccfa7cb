-- Group commit: one write transaction per batch of queued records.
BEGIN IMMEDIATE;
