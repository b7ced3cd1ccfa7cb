-- 004_instance_headers.sql - the header copy of each instance (retention
-- = header): the object as received without its pixel data and other
-- bulk data, as the bytes of a DICOM Part 10 file. It is written in the
-- same transaction as the instance's row, so a row and its copy are
-- committed together or not at all, and no file is created per object.
-- Earlier versions kept these copies as files under headers/; those files
-- stay where they are.
--
-- One row per instance; a re-sent object replaces its copy. A re-send
-- under retention none removes the older copy (what is kept always
-- belongs to the latest receipt).

CREATE TABLE instance_headers (
    instance_id  INTEGER PRIMARY KEY REFERENCES instances (id),
    bytes        BLOB NOT NULL    -- Part 10 file: preamble, meta header, data set
) STRICT;

PRAGMA user_version = 4;
