INSERT INTO group_rules VALUES (:group_position, :rule_id, :count);
