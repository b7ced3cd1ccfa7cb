/*
 * sql_files.h - the SQL text of sql/, compiled into the binary by
 * cmake/embed_sql.cmake. Names are paths relative to sql/, e.g.
 * "migrations/001_instances.sql" or "queries/instances/instances_by_study.sql";
 * an engine's own text sits in a folder named after the engine beside the
 * common file ("queries/SUBJECT/postgresql/NAME.sql", "migrations/postgresql/"),
 * and store_sql_text() (store_statement.h) picks it for that engine.
 * The table ends with a {NULL, NULL} entry. Static storage; never freed.
 */
#ifndef MITILOG_SQL_FILES_H
#define MITILOG_SQL_FILES_H

typedef struct sql_file {
    const char *name;
    const char *text;
} sql_file;

extern const sql_file sql_files[];

/* Text of the named file, or NULL (store/sql_files.c). */
const char *sql_file_text(const char *name);

#endif
