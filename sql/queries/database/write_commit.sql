-- Group commit: end of the batch; callers are told only after this.
COMMIT;
