-- What a policy sets for exams of one group and age group (store_write_policy,
-- from rules_policy_limits()), appended to the policy's limits; the
-- dashboard draws them. Its dwell table: policy_dwell_step_append.sql.
UPDATE policies SET limits_json = json_insert(limits_json, '$[#]', json_object(
    'group', :group, 'age_group', :age_group,
    'ti_ceiling', :ti_ceiling, 'mi_ceiling', :mi_ceiling,
    'mi_equipment', :mi_equipment, 'ti_equipment', :ti_equipment,
    'dwell_rule', :dwell_rule, 'dwell', json_array()))
WHERE version = :version;
