-- PostgreSQL: foreign keys are always enforced; nothing to switch.
SELECT 1;
