-- The columns of table ?1 in their order: name, position in the primary
-- key (0: not part of it), 1 when a row must give it (NOT NULL without a
-- default).
SELECT name, pk, "notnull" <> 0 AND dflt_value IS NULL AS required
FROM pragma_table_info(?1)
ORDER BY cid;
