# Turns every sql/migrations/*.sql and sql/queries/SUBJECT/*.sql, and the
# engine overrides in folders beside them (sql/migrations/ENGINE/*.sql,
# sql/queries/SUBJECT/ENGINE/*.sql), into C string constants, so the
# binary carries its own schema and queries.
# Output: const sql_file sql_files[] (name, text), NULL-ended, named by the
# path under sql/ ("migrations/ENGINE/NNN_NAME.sql" for an override).
file(GLOB_RECURSE migrations ${SQL_DIR}/migrations/*.sql)
# queries by subject, one folder each: named "queries/SUBJECT/NAME.sql"
file(GLOB_RECURSE queries ${SQL_DIR}/queries/*.sql)
list(SORT migrations)
list(SORT queries)
set(body "/* Generated from sql/ by cmake/embed_sql.cmake; do not edit. */\n")
string(APPEND body "#include \"store/sql_files.h\"\n\n")
set(table "const sql_file sql_files[] = {\n")
set(index 0)
foreach(path ${migrations} ${queries})
  file(READ ${path} text)
  file(RELATIVE_PATH name ${SQL_DIR} ${path})
  # Raw bytes as a hex array: no escaping problems, any length.
  file(READ ${path} hex HEX)
  string(REGEX REPLACE "([0-9a-f][0-9a-f])" "0x\\1," hex "${hex}")
  string(APPEND body "static const char sql_text_${index}[] = {${hex}0x00};\n")
  string(APPEND table "    {\"${name}\", sql_text_${index}},\n")
  math(EXPR index "${index} + 1")
endforeach()
string(APPEND table "    {0, 0}\n};\n")
file(WRITE ${OUTPUT}.tmp "${body}\n${table}")
file(COPY_FILE ${OUTPUT}.tmp ${OUTPUT} ONLY_IF_DIFFERENT)
