-- PostgreSQL's sites.sql (docs/postgresql-dialect.md): the same document,
-- built with json_build_object (SQLite's json_object takes any number of
-- mixed arguments, which no PostgreSQL function can), the sites' order
-- inside the aggregate.
-- GET /api/v1/sites: every site that holds instances or rejections
-- (migration 013), as a JSON array ordered by name: its instances,
-- studies (exams whose first instance it took), rejections and last
-- receipt. The dashboard's site selector reads it (shown when there is
-- more than one).
SELECT coalesce(json_group_array(json_build_object(
    'site', site, 'instances', instances, 'studies', studies, 'rejections', rejections,
    'last_received_at', last_received_at) ORDER BY site), '[]') FROM (
    SELECT n.site,
           (SELECT count(*) FROM instances i WHERE i.site = n.site) AS instances,
           (SELECT count(*) FROM exam_summaries x WHERE x.site = n.site) AS studies,
           (SELECT count(*) FROM rejections j WHERE j.site = n.site) AS rejections,
           (SELECT max(i.received_at) FROM instances i WHERE i.site = n.site) AS last_received_at
    FROM (SELECT DISTINCT site FROM instances UNION SELECT DISTINCT site FROM rejections) n) AS sites;
