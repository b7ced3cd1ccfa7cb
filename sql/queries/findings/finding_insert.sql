-- One finding. Span: seconds since 0001-01-01T00:00:00 (ext_iso_to_seconds)
-- turned back into ISO 8601 (julianday of 0001-01-01 is 1721425.5); no
-- span (NULL seconds) gives NULL, as strftime of NULL is NULL.
INSERT INTO findings (
    study_instance_uid, rule_id, severity, quantity, measured_value, unit,
    limit_value, threshold, governing_index, instance_uids, started_at,
    ended_at, estimated_seconds, assumptions, source_text, provisional,
    superseded, policy_version, exam_type, room, preset, shift, transducer,
    evaluated_at, period)
VALUES (
    :study_instance_uid, :rule_id, :severity, :quantity, :measured_value, :unit,
    :limit_value, :threshold, :governing_index, json(:instance_uids),
    strftime('%Y-%m-%dT%H:%M:%S', 1721425.5 + :first_seconds / 86400.0),
    strftime('%Y-%m-%dT%H:%M:%S', 1721425.5 + :last_seconds / 86400.0),
    :estimated_seconds, :assumptions, :source_text, :provisional, 0,
    :policy_version, :exam_type, :room, :preset, :shift, :transducer,
    strftime('%Y-%m-%dT%H:%M:%fZ', 'now'), :period);
