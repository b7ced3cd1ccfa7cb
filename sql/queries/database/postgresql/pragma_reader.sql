-- PostgreSQL: read connection settings; the engine opens it read-only
-- already (default_transaction_read_only), said again here.
SET default_transaction_read_only = on;
