-- The body of an HTTP error: {"error": message}, quoted by SQLite.
SELECT json_object('error', ?1);
