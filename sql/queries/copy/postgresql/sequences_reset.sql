-- After rows were copied with their ids: every sequence that gives a
-- column its next id (identity columns, and the DEFAULT nextval(...) of
-- the partitioned tables) continues after the largest id copied.
DO $reset$
DECLARE
    item record;
    sequence_name text;
BEGIN
    FOR item IN
        SELECT c.relname AS table_name, a.attname AS column_name,
               pg_get_expr(d.adbin, d.adrelid) AS default_text, a.attidentity
        FROM pg_attribute a
        JOIN pg_class c ON c.oid = a.attrelid
        LEFT JOIN pg_attrdef d ON d.adrelid = a.attrelid AND d.adnum = a.attnum
        WHERE c.relnamespace = current_schema()::regnamespace
          AND c.relkind IN ('r', 'p') AND NOT c.relispartition
          AND a.attnum > 0 AND NOT a.attisdropped
          AND (a.attidentity <> '' OR pg_get_expr(d.adbin, d.adrelid) LIKE 'nextval(%')
    LOOP
        IF item.attidentity <> '' THEN
            sequence_name := pg_get_serial_sequence(quote_ident(item.table_name), item.column_name);
        ELSE
            sequence_name := substring(item.default_text FROM 'nextval\(''([^'']+)''');
        END IF;
        IF sequence_name IS NOT NULL THEN
            EXECUTE format('SELECT setval(%L, coalesce((SELECT max(%I) FROM %I), 0) + 1, false)',
                           sequence_name, item.column_name, item.table_name);
        END IF;
    END LOOP;
END
$reset$;
