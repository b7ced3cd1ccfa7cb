-- 012_reviews.sql - what reviewers did about findings and exams, and the
-- accession number a reviewer searches the PACS by.
--
-- Append-only: one row per act (who, when, what); a later row about the
-- same finding or exam does not change an earlier one, and UPDATE and
-- DELETE are refused by the triggers below, so the history stays whole.
-- The newest row of a finding (or, for exam-level rows, of the exam)
-- says whether it is still open: see queries/review_worklist.sql.
CREATE TABLE reviews (
    id                  INTEGER PRIMARY KEY,
    study_instance_uid  TEXT,        -- NULL only for a device-level finding
    finding_id          INTEGER,     -- NULL: the whole exam was reviewed
    outcome             TEXT NOT NULL CHECK (outcome IN (
                            'acceptable', 'discussed_with_operator',
                            'referred_to_physics', 'preset_to_change', 'reopened')),
    comment             TEXT NOT NULL DEFAULT '' CHECK (length(comment) <= 2000),
    reviewer            TEXT NOT NULL,
    role                TEXT NOT NULL,
    reviewed_at         TEXT NOT NULL, -- ISO 8601 UTC
    CHECK (study_instance_uid IS NOT NULL OR finding_id IS NOT NULL)
) STRICT;

CREATE INDEX reviews_study ON reviews (study_instance_uid, id);
CREATE INDEX reviews_finding ON reviews (finding_id, id) WHERE finding_id IS NOT NULL;
CREATE INDEX reviews_time ON reviews (reviewed_at);

CREATE TRIGGER reviews_no_update BEFORE UPDATE ON reviews
BEGIN
    SELECT raise(ABORT, 'reviews are append-only: add a new review instead');
END;

CREATE TRIGGER reviews_no_delete BEFORE DELETE ON reviews
BEGIN
    SELECT raise(ABORT, 'reviews are append-only: add a new review instead');
END;

-- Accession Number (0008,0050) of each instance, so that a listed exam
-- can be found in the PACS; NULL when absent or received before this.
ALTER TABLE instances ADD COLUMN accession_number TEXT;

PRAGMA user_version = 12;
