-- GET /metrics: the database's size in bytes (store_metrics_read). On
-- SQLite its pages (page_count x page_size: the database as this
-- connection sees it, pages still in the write-ahead log included, free
-- pages too); PostgreSQL's text is in postgresql/database_size.sql.
SELECT page_count * page_size FROM pragma_page_count(), pragma_page_size();
