-- Inside an evaluation's transaction: the policy row exists (a finding's
-- policy_version refers to it) even if it was never registered.
INSERT INTO policies (version, name, normalised_text, first_loaded_at)
VALUES (:version, :name, :normalised_text, strftime('%Y-%m-%dT%H:%M:%fZ', 'now'))
ON CONFLICT (version) DO NOTHING;
