-- The values of one evaluation of an exam (one row per exam and version);
-- its times at or above the TI ladder: measurement_time_at_or_above_*.sql.
INSERT INTO exam_measurements (
    study_instance_uid, policy_version, governing_index, max_governing, max_mi,
    cem43_minutes, estimated_seconds, doppler_seconds, evaluated_at, evaluation_hash)
VALUES (
    :study_instance_uid, :policy_version, :governing_index, :max_governing, :max_mi,
    :cem43_minutes, :estimated_seconds, :doppler_seconds, strftime('%Y-%m-%dT%H:%M:%fZ', 'now'), :evaluation_hash)
ON CONFLICT (study_instance_uid, policy_version) DO UPDATE SET
    governing_index = excluded.governing_index, max_governing = excluded.max_governing,
    max_mi = excluded.max_mi, cem43_minutes = excluded.cem43_minutes,
    estimated_seconds = excluded.estimated_seconds,
    doppler_seconds = excluded.doppler_seconds,
    evaluated_at = excluded.evaluated_at, evaluation_hash = excluded.evaluation_hash;
