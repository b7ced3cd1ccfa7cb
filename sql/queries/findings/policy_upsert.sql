-- Registers a policy (store_register_policy): keeps first_loaded_at,
-- writes the rules description and the limits, both JSON documents the
-- store writes from the policy (store_findings.c, json/json.h).
INSERT INTO policies (version, name, normalised_text, first_loaded_at, rules_json, limits_json,
                      closed_after_idle_minutes, gap_cap_seconds, last_loaded_at)
VALUES (:version, :name, :normalised_text, strftime('%Y-%m-%dT%H:%M:%fZ', 'now'), :rules_json,
        :limits_json, :closed_after_idle_minutes, :gap_cap_seconds,
        strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
ON CONFLICT (version) DO UPDATE SET
    name = excluded.name, rules_json = excluded.rules_json, limits_json = excluded.limits_json,
    closed_after_idle_minutes = excluded.closed_after_idle_minutes,
    gap_cap_seconds = excluded.gap_cap_seconds,
    last_loaded_at = excluded.last_loaded_at;
