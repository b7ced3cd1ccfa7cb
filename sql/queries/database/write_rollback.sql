-- Group commit: undo the whole batch after a failed commit.
ROLLBACK;
