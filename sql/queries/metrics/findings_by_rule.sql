-- GET /metrics: current findings (not superseded) counted by rule and
-- severity (store_metrics_read). Plain SQL common to SQLite and
-- PostgreSQL.
SELECT rule_id, severity, count(*) AS findings
FROM findings
WHERE superseded = 0
GROUP BY rule_id, severity
ORDER BY rule_id, severity;
