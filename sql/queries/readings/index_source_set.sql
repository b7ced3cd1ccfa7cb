-- The policy's index_source (migration 007): 'screen' or 'header'.
UPDATE index_source_setting SET preferred = ?1 WHERE only_row = 1;
