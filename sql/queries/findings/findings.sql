-- GET /api/v1/findings: a JSON array of findings, newest first.
-- ?1 from, ?2 to (dates 'YYYY-MM-DD', inclusive, on the finding's
-- started_at, else the exam's first acquisition, else its period),
-- ?3 severity, ?4 rule, ?5 room, ?6 preset, ?7 shift (NULL = any),
-- ?8 include superseded (0/1), ?9 limit.
--
-- Findings with a start time are found through findings_period
-- (superseded, started_at) in a range that holds every start time whose
-- date is in [?1, ?2] (the text of a time on day D sorts from D up to, not
-- including, D + 1 day), so the work follows the period, not the findings
-- held; the exact day test below still decides. Findings without one are
-- few (the same index, started_at NULL) and take their day from the exam
-- or their period.
WITH candidates AS (
    SELECT f.* FROM findings f
    WHERE f.superseded IN (0, iif(?8, 1, 0))
      AND f.started_at >= coalesce(?1, '')
      AND f.started_at < coalesce(date(?2, '+1 day'), char(1114111))
    UNION ALL
    SELECT f.* FROM findings f
    WHERE f.superseded IN (0, iif(?8, 1, 0)) AND f.started_at IS NULL
),
chosen AS (
    SELECT f.*, substr(coalesce(f.started_at, e.first_acquired_at, f.period), 1, 10) AS day
    FROM candidates f LEFT JOIN exams e ON e.study_instance_uid = f.study_instance_uid
    WHERE (CAST(?3 AS TEXT) IS NULL OR f.severity = ?3) AND (CAST(?4 AS TEXT) IS NULL OR f.rule_id = ?4)
      AND (CAST(?5 AS TEXT) IS NULL OR f.room = ?5) AND (CAST(?6 AS TEXT) IS NULL OR f.preset = ?6)
      AND (CAST(?7 AS TEXT) IS NULL OR f.shift = ?7))
SELECT coalesce(json_group_array(json(document)), '[]') FROM (
    SELECT json_object(
        'id', id, 'study_instance_uid', study_instance_uid, 'rule_id', rule_id,
        'severity', severity, 'quantity', quantity, 'measured_value', measured_value,
        'unit', unit, 'limit_value', limit_value, 'threshold', threshold,
        'governing_index', governing_index, 'instance_uids', json(instance_uids),
        'started_at', started_at, 'ended_at', ended_at,
        'estimated_seconds', estimated_seconds, 'assumptions', assumptions,
        'source', source_text,
        'provisional', json(iif(provisional, 'true', 'false')),
        'superseded', json(iif(superseded, 'true', 'false')),
        'policy_version', policy_version, 'exam_type', exam_type, 'room', room,
        'preset', preset, 'shift', shift, 'transducer', transducer,
        'period', period, 'evaluated_at', evaluated_at) AS document
    FROM chosen
    WHERE (CAST(?1 AS TEXT) IS NULL OR day >= ?1) AND (CAST(?2 AS TEXT) IS NULL OR day <= ?2)
    ORDER BY day DESC, id DESC LIMIT ?9);
