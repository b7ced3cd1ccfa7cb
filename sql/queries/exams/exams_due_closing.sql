-- Open exams idle for at least ?2 seconds at ?1 (Unix seconds now): the
-- sweep re-evaluates them so their findings lose the provisional flag.
SELECT study_instance_uid FROM exam_context
WHERE closed = 0
  AND (julianday(?1, 'unixepoch') - julianday(last_received_at)) * 86400.0 >= ?2
ORDER BY last_received_at, study_instance_uid;
