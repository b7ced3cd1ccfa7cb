-- One normalised setting of a rule (key as the policy file writes it, e.g.
-- "limit.group.ophthalmic"; value as normalised text, "2" or "off").
UPDATE policies SET rules_json = json_set(rules_json,
    '$[' || :rule_index || '].settings."' || :key || '"', :value)
WHERE version = :version;
