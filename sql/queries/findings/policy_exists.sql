-- Whether the policy row of version ?1 is held already: when it is not,
-- the policy_upsert.sql or policy_ensure.sql that follows adds it, and
-- the added row becomes the current policy (store_findings.c).
SELECT count(*) FROM policies WHERE version = ?1;
