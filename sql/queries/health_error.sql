-- The health object when the database cannot be queried; ?1 the reason.
SELECT json_object('status', 'error', 'database', 'error', 'message', ?1);
