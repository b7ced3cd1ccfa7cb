-- The newest run, for the ingest status: its row, and the studies of its
-- source by state.
SELECT r.id, r.source, r.state, r.message, r.studies_found, r.studies_done, r.studies_failed,
       r.objects, r.objects_per_minute, r.seconds_left, r.started_at, r.updated_at,
       r.finished_at,
       (SELECT count(*) FROM backfill_studies s WHERE s.source = r.source),
       (SELECT count(*) FROM backfill_studies s WHERE s.source = r.source AND s.state = 'done'),
       (SELECT count(*) FROM backfill_studies s WHERE s.source = r.source AND s.state = 'failed'),
       (SELECT coalesce(sum(objects_stored), 0) FROM backfill_studies s
        WHERE s.source = r.source)
FROM backfill_runs r ORDER BY r.id DESC LIMIT 1;
