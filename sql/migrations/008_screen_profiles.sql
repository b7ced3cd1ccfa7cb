-- 008_screen_profiles.sql - device screen profiles: where a device draws
-- the indices on its screen, its labels, number format and glyphs
-- (src/screen/screen.h; docs/screen-reading.md). One row per key and
-- version. A profile is learned as 'proposed', becomes 'active' when an
-- administrator confirms it (who and when are kept), 'retired' when it is
-- replaced or withdrawn. At most one version of a key is active.
CREATE TABLE screen_profiles (
    id INTEGER PRIMARY KEY,
    profile_key TEXT NOT NULL,
    version INTEGER NOT NULL,
    manufacturer TEXT,
    model_name TEXT,
    software_versions TEXT,
    rows INTEGER,
    columns INTEGER,
    profile_text TEXT NOT NULL,
    state TEXT NOT NULL DEFAULT 'proposed'
        CHECK (state IN ('proposed', 'active', 'retired')),
    learned_at TEXT NOT NULL,
    report TEXT,
    example_image BLOB,            -- one learning frame as binary PGM (P5)
    confirmed_by TEXT,
    confirmed_at TEXT,
    retired_at TEXT,
    UNIQUE (profile_key, version)
);

CREATE UNIQUE INDEX screen_profiles_one_active
    ON screen_profiles (profile_key) WHERE state = 'active';
PRAGMA user_version = 8;
