-- Registers a policy (store_register_policy): keeps first_loaded_at,
-- resets the rules description and the limits (rebuilt by
-- policy_rule_append.sql, policy_setting_set.sql, policy_limits_append.sql
-- and policy_dwell_step_append.sql in the same transaction).
INSERT INTO policies (version, name, normalised_text, first_loaded_at, rules_json,
                      closed_after_idle_minutes, gap_cap_seconds, last_loaded_at)
VALUES (:version, :name, :normalised_text, strftime('%Y-%m-%dT%H:%M:%fZ', 'now'), '[]',
        :closed_after_idle_minutes, :gap_cap_seconds, strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
ON CONFLICT (version) DO UPDATE SET
    name = excluded.name, rules_json = '[]', limits_json = '[]',
    closed_after_idle_minutes = excluded.closed_after_idle_minutes,
    gap_cap_seconds = excluded.gap_cap_seconds,
    last_loaded_at = excluded.last_loaded_at;
