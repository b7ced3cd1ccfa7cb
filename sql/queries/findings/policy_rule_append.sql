-- One rule appended to a policy's description (policy order).
UPDATE policies SET rules_json = json_insert(rules_json, '$[#]', json_object(
    'id', :id, 'kind', :kind, 'severity', :severity,
    'enabled', json(iif(:enabled, 'true', 'false')),
    'source', :source, 'description', :description, 'settings', json_object()))
WHERE version = :version;
