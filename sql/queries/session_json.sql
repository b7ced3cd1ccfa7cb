-- GET /api/v1/session: who is signed in. ?1 user (NULL: no login is
-- configured), ?2 role, ?3 the token every write must carry, ?4 1 when
-- the server requires a login.
SELECT json_object('user', ?1, 'role', ?2, 'csrf_token', ?3,
                   'login_required', json(iif(?4, 'true', 'false')),
                   'can_review', json(iif(?2 = 'reviewer', 'true', 'false')));
