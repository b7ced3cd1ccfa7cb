-- One row of the dwell table of entry :index of a policy's limits:
-- the longest time (minutes; null when not recommended at all) at or
-- above a displayed TI.
UPDATE policies SET limits_json = json_insert(limits_json,
    '$[' || :index || '].dwell[#]', json_object(
        'threshold', :threshold, 'minutes', :minutes,
        'not_recommended', json(iif(:not_recommended, 'true', 'false'))))
WHERE version = :version;
