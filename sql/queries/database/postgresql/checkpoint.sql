-- PostgreSQL: nothing to do at close; the server checkpoints by itself.
SELECT 1;
