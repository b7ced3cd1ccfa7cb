-- PostgreSQL's policy_json.sql (docs/postgresql-dialect.md): the same
-- document, built with json_build_object (SQLite's json_object takes any
-- number of mixed arguments, which no PostgreSQL function can), the
-- ladder's order inside its aggregate. GET /api/v1/policy: the active
-- policy of this process. ?1 version.
SELECT json_build_object(
    'version', version, 'name', name,
    'first_loaded_at', first_loaded_at, 'loaded_at', last_loaded_at,
    'closed_after_idle_minutes', closed_after_idle_minutes,
    'gap_cap_seconds', gap_cap_seconds,
    'rules', json(rules_json),
    'ti_ladder', (SELECT json_group_array(threshold ORDER BY threshold) FROM ti_thresholds),
    'limits', json(limits_json),
    'caution', 'Defaults with their sources in docs/domain.md section 4; values marked "from memory" must be '
               || 'checked against the named document. Local policy governs: the department''s '
               || 'safety policy, its medical physicist and local regulation decide; mitilog advises.')
FROM policies WHERE version = ?1;
