-- The values of one evaluation of an exam (one row per exam and version).
INSERT INTO exam_measurements (
    study_instance_uid, policy_version, governing_index, max_governing, max_mi,
    cem43_minutes, estimated_seconds, doppler_seconds, seconds_at_or_above,
    evaluated_at, evaluation_hash)
VALUES (
    :study_instance_uid, :policy_version, :governing_index, :max_governing, :max_mi,
    :cem43_minutes, :estimated_seconds, :doppler_seconds,
    json_object('0.7', :s07, '1.0', :s10, '1.5', :s15, '2.0', :s20, '2.5', :s25, '3.0', :s30),
    strftime('%Y-%m-%dT%H:%M:%fZ', 'now'), :evaluation_hash)
ON CONFLICT (study_instance_uid, policy_version) DO UPDATE SET
    governing_index = excluded.governing_index, max_governing = excluded.max_governing,
    max_mi = excluded.max_mi, cem43_minutes = excluded.cem43_minutes,
    estimated_seconds = excluded.estimated_seconds,
    doppler_seconds = excluded.doppler_seconds,
    seconds_at_or_above = excluded.seconds_at_or_above,
    evaluated_at = excluded.evaluated_at, evaluation_hash = excluded.evaluation_hash;
