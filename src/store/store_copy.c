/*
 * store_copy.c - an SQLite database of mitilog into an empty PostgreSQL
 * one, through the two engines of store_engine.h (store_copy.h).
 *
 * The catalog questions (which tables, which columns, which key) and the
 * transaction statements are files of sql/queries/copy/, with PostgreSQL's
 * text in sql/queries/copy/postgresql/. The statements that read and write
 * one table's rows are the one exception to "SQL lives in sql/": they are
 * built here from the column names the two catalogs gave (each quoted as
 * an identifier), since they follow the schema of the version copied;
 * every value still travels as a bound parameter.
 */
#include "store/store_copy.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/sql_files.h"
#include "store/store_engine.h"
#include "store/store_engine_postgresql.h"
#include "util/hash.h"

/* Rows per INSERT, and the most parameters one INSERT binds (PostgreSQL
 * takes at most 65535 parameters in a statement: protocol's Int16 count). */
enum { STORE_COPY_BATCH_ROWS = 200, STORE_COPY_BATCH_PARAMETERS = 20000 };

/* Tables the PostgreSQL migrations fill themselves (the vocabulary and the
 * settings row): a new database holds their rows already, so they are not
 * taken as data, and the copy replaces them with the SQLite database's
 * rows, which the stored exams were computed with. data_days (migration
 * 018) is filled by triggers as the exams' rows arrive, so it too is
 * replaced rather than added to. */
static const char *const store_copy_vocabulary[] = {"mode_names", "ti_thresholds",
                                                    "index_source_setting", "data_days"};

typedef struct store_copy_text {
    char *text;
    size_t length;
    size_t capacity;
    int failed;
} store_copy_text;

static void store_copy_append(store_copy_text *t, const char *format, ...)
{
    if (t->failed)
        return;
    for (;;) {
        va_list arguments;
        va_start(arguments, format);
        size_t room = t->capacity - t->length;
        int needed =
            vsnprintf(t->text != NULL ? t->text + t->length : NULL, room, format, arguments);
        va_end(arguments);
        if (needed < 0) {
            t->failed = 1;
            return;
        }
        if ((size_t)needed < room) {
            t->length += (size_t)needed;
            return;
        }
        size_t capacity = t->capacity * 2 + (size_t)needed + 256;
        char *grown = realloc(t->text, capacity);
        if (grown == NULL) {
            t->failed = 1;
            return;
        }
        t->text = grown;
        t->capacity = capacity;
    }
}

/* name as a quoted identifier: "name", an embedded quote doubled. */
static void store_copy_append_identifier(store_copy_text *t, const char *name)
{
    store_copy_append(t, "\"");
    for (const char *p = name; *p != '\0'; p++)
        store_copy_append(t, *p == '"' ? "\"\"" : "%c", *p);
    store_copy_append(t, "\"");
}

typedef struct store_copy_column {
    char *name;
    int key;      /* position in the primary key, 0: not in it */
    int required; /* NOT NULL without a default */
} store_copy_column;

typedef struct store_copy_columns {
    store_copy_column *items;
    int count;
} store_copy_columns;

static void store_copy_columns_free(store_copy_columns *columns)
{
    for (int i = 0; i < columns->count; i++)
        free(columns->items[i].name);
    free(columns->items);
    columns->items = NULL;
    columns->count = 0;
}

static int store_copy_column_index(const store_copy_columns *columns, const char *name)
{
    for (int i = 0; i < columns->count; i++)
        if (strcmp(columns->items[i].name, name) == 0)
            return i;
    return -1;
}

typedef struct store_copy_side {
    const store_engine *engine;
    store_connection *connection;
    const char *what; /* "the SQLite database", "the PostgreSQL database" */
    int postgresql;
} store_copy_side;

/* The text of queries/copy/NAME, PostgreSQL's own when it has one. */
static const char *store_copy_sql(const store_copy_side *side, const char *name, char *path,
                                  size_t size)
{
    const char *text = NULL;
    if (side->postgresql) {
        snprintf(path, size, "queries/copy/postgresql/%s", name);
        text = sql_file_text(path);
    }
    if (text == NULL) {
        snprintf(path, size, "queries/copy/%s", name);
        text = sql_file_text(path);
    }
    return text;
}

static mitilog_status store_copy_prepare(const store_copy_side *side, const char *file,
                                         store_statement **out, mitilog_error *error)
{
    char path[128];
    const char *text = store_copy_sql(side, file, path, sizeof path);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "%s is not built in", path);
    return side->engine->prepare(side->connection, path, text, out, error);
}

static mitilog_status store_copy_script(const store_copy_side *side, const char *file,
                                        mitilog_error *error)
{
    char path[128];
    const char *text = store_copy_sql(side, file, path, sizeof path);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "%s is not built in", path);
    return side->engine->execute_script(side->connection, path, text, error);
}

/* A table list: names and whether each has a rowid. */
typedef struct store_copy_tables {
    char **names;
    int *has_rowid;
    int count;
} store_copy_tables;

static void store_copy_tables_free(store_copy_tables *tables)
{
    for (int i = 0; i < tables->count; i++)
        free(tables->names[i]);
    free(tables->names);
    free(tables->has_rowid);
    memset(tables, 0, sizeof *tables);
}

static int store_copy_table_index(const store_copy_tables *tables, const char *name)
{
    for (int i = 0; i < tables->count; i++)
        if (strcmp(tables->names[i], name) == 0)
            return i;
    return -1;
}

static mitilog_status store_copy_list_tables(const store_copy_side *side, store_copy_tables *out,
                                             mitilog_error *error)
{
    memset(out, 0, sizeof *out);
    store_statement *statement = NULL;
    mitilog_status status = store_copy_prepare(side, "tables.sql", &statement, error);
    int has_row = 0;
    while (status == MITILOG_OK &&
           (status = side->engine->step(statement, &has_row, error)) == MITILOG_OK && has_row) {
        const char *name = side->engine->column_text(statement, 0);
        char **names = realloc(out->names, (size_t)(out->count + 1) * sizeof *names);
        if (names != NULL)
            out->names = names;
        int *rowid = realloc(out->has_rowid, (size_t)(out->count + 1) * sizeof *rowid);
        if (rowid != NULL)
            out->has_rowid = rowid;
        char *copy = name != NULL ? strdup(name) : NULL;
        if (names == NULL || rowid == NULL || copy == NULL) {
            free(copy);
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "table list: out of memory");
            break;
        }
        out->names[out->count] = copy;
        out->has_rowid[out->count] = (int)side->engine->column_integer(statement, 1);
        out->count++;
    }
    side->engine->finalize(statement);
    if (status != MITILOG_OK)
        store_copy_tables_free(out);
    return status;
}

static mitilog_status store_copy_list_columns(const store_copy_side *side, const char *table,
                                              store_copy_columns *out, mitilog_error *error)
{
    memset(out, 0, sizeof *out);
    store_statement *statement = NULL;
    mitilog_status status = store_copy_prepare(side, "columns.sql", &statement, error);
    if (status == MITILOG_OK)
        status = side->engine->bind_text(statement, 1, table, strlen(table), error);
    int has_row = 0;
    while (status == MITILOG_OK &&
           (status = side->engine->step(statement, &has_row, error)) == MITILOG_OK && has_row) {
        const char *name = side->engine->column_text(statement, 0);
        store_copy_column *items =
            realloc(out->items, (size_t)(out->count + 1) * sizeof *out->items);
        char *copy = name != NULL ? strdup(name) : NULL;
        if (items == NULL || copy == NULL) {
            free(copy);
            if (items != NULL)
                out->items = items;
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", table);
            break;
        }
        out->items = items;
        out->items[out->count].name = copy;
        out->items[out->count].key = (int)side->engine->column_integer(statement, 1);
        out->items[out->count].required = (int)side->engine->column_integer(statement, 2) != 0;
        out->count++;
    }
    side->engine->finalize(statement);
    if (status != MITILOG_OK)
        store_copy_columns_free(out);
    return status;
}

/* Runs one statement built here (no rows wanted). */
static mitilog_status store_copy_run(const store_copy_side *side, const char *name, const char *sql,
                                     mitilog_error *error)
{
    store_statement *statement = NULL;
    mitilog_status status = side->engine->prepare(side->connection, name, sql, &statement, error);
    int has_row = 0;
    while (status == MITILOG_OK &&
           (status = side->engine->step(statement, &has_row, error)) == MITILOG_OK && has_row) {
    }
    side->engine->finalize(statement);
    return status;
}

/* The number of rows of table (a statement built here). */
static mitilog_status store_copy_count(const store_copy_side *side, const char *table,
                                       long long *rows, mitilog_error *error)
{
    store_copy_text sql = {0};
    store_copy_append(&sql, "SELECT count(*) FROM ");
    store_copy_append_identifier(&sql, table);
    if (sql.failed) {
        free(sql.text);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", table);
    }
    store_statement *statement = NULL;
    int has_row = 0;
    mitilog_status status =
        side->engine->prepare(side->connection, "count rows", sql.text, &statement, error);
    if (status == MITILOG_OK)
        status = side->engine->step(statement, &has_row, error);
    *rows = status == MITILOG_OK && has_row ? side->engine->column_integer(statement, 0) : 0;
    side->engine->finalize(statement);
    free(sql.text);
    return status;
}

/* One value, the same on both engines whatever type each gives it: a
 * number by its value (an integral real as the integer), a text or blob by
 * its bytes; folded into row. */
static uint64_t store_copy_fold(const store_copy_side *side, store_statement *statement, int column,
                                uint64_t row)
{
    const store_engine *engine = side->engine;
    char number[48];
    const void *bytes = number;
    size_t size = 0;
    switch (engine->column_type(statement, column)) {
    case STORE_VALUE_NULL: size = (size_t)snprintf(number, sizeof number, "N"); break;
    case STORE_VALUE_INTEGER:
        size = (size_t)snprintf(number, sizeof number, "I%lld",
                                engine->column_integer(statement, column));
        break;
    case STORE_VALUE_REAL: {
        double value = engine->column_real(statement, column);
        if (isfinite(value) && value == floor(value) && fabs(value) < 9007199254740992.0)
            size = (size_t)snprintf(number, sizeof number, "I%lld", (long long)value);
        else
            size = (size_t)snprintf(number, sizeof number, "R%.17g", value);
        break;
    }
    case STORE_VALUE_TEXT:
    case STORE_VALUE_BLOB:
        bytes = engine->column_type(statement, column) == STORE_VALUE_TEXT
                    ? (const void *)engine->column_text(statement, column)
                    : engine->column_blob(statement, column);
        size = engine->column_bytes(statement, column);
        if (bytes == NULL)
            bytes = "";
        break;
    }
    /* FNV-1a's prime: each column moves the row's hash before the next. */
    return (row ^ hash_fnv1a(bytes, size)) * 1099511628211ULL;
}

/* Rows and the order-free checksum (the sum of the rows' hashes) of the
 * key columns of table. */
static mitilog_status store_copy_checksum(const store_copy_side *side, const char *table,
                                          const store_copy_columns *keys, long long *rows,
                                          uint64_t *checksum, mitilog_error *error)
{
    store_copy_text sql = {0};
    store_copy_append(&sql, "SELECT ");
    for (int i = 0; i < keys->count; i++) {
        if (i > 0)
            store_copy_append(&sql, ", ");
        store_copy_append_identifier(&sql, keys->items[i].name);
    }
    store_copy_append(&sql, " FROM ");
    store_copy_append_identifier(&sql, table);
    *rows = 0;
    *checksum = 0;
    if (sql.failed) {
        free(sql.text);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", table);
    }
    store_statement *statement = NULL;
    mitilog_status status =
        side->engine->prepare(side->connection, "key checksum", sql.text, &statement, error);
    int has_row = 0;
    while (status == MITILOG_OK &&
           (status = side->engine->step(statement, &has_row, error)) == MITILOG_OK && has_row) {
        uint64_t row = 14695981039346656037ULL;
        for (int i = 0; i < keys->count; i++)
            row = store_copy_fold(side, statement, i, row);
        *checksum += row;
        (*rows)++;
    }
    side->engine->finalize(statement);
    free(sql.text);
    if (status != MITILOG_OK) {
        mitilog_error inner = *error;
        mitilog_error_set(error, status, "%s of %s: %s", table, side->what, inner.text);
    }
    return status;
}

/* Copies of the blobs bound to one batch (the target engine borrows them
 * until the batch has run; the source's are gone at its next row). */
typedef struct store_copy_blobs {
    void **items;
    int count;
    int capacity;
} store_copy_blobs;

static void store_copy_blobs_clear(store_copy_blobs *blobs)
{
    for (int i = 0; i < blobs->count; i++)
        free(blobs->items[i]);
    blobs->count = 0;
}

static mitilog_status store_copy_bind(const store_copy_side *source, store_statement *row,
                                      int column, const store_copy_side *target,
                                      store_statement *insert, int index, store_copy_blobs *blobs,
                                      mitilog_error *error)
{
    const store_engine *from = source->engine, *to = target->engine;
    switch (from->column_type(row, column)) {
    case STORE_VALUE_NULL: return to->bind_null(insert, index, error);
    case STORE_VALUE_INTEGER:
        return to->bind_integer(insert, index, from->column_integer(row, column), error);
    case STORE_VALUE_REAL:
        return to->bind_real(insert, index, from->column_real(row, column), error);
    case STORE_VALUE_TEXT: {
        const char *text = from->column_text(row, column);
        return to->bind_text(insert, index, text != NULL ? text : "",
                             from->column_bytes(row, column), error);
    }
    case STORE_VALUE_BLOB: {
        size_t size = from->column_bytes(row, column);
        if (blobs->count == blobs->capacity) {
            int capacity = blobs->capacity * 2 + 16;
            void **items = realloc(blobs->items, (size_t)capacity * sizeof *items);
            if (items == NULL)
                return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "blob: out of memory");
            blobs->items = items;
            blobs->capacity = capacity;
        }
        void *copy = malloc(size > 0 ? size : 1);
        if (copy == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "blob: out of memory");
        if (size > 0)
            memcpy(copy, from->column_blob(row, column), size);
        blobs->items[blobs->count++] = copy;
        return to->bind_blob(insert, index, copy, size, error);
    }
    }
    return mitilog_error_set(error, MITILOG_ERROR_INVALID, "unknown value type");
}

/* INSERT INTO table (columns) VALUES (?1, ...), ... for rows rows. */
static char *store_copy_insert_text(const char *table, const store_copy_columns *target,
                                    const int *from, int rows)
{
    store_copy_text sql = {0};
    store_copy_append(&sql, "INSERT INTO ");
    store_copy_append_identifier(&sql, table);
    store_copy_append(&sql, " (");
    int used = 0;
    for (int i = 0; i < target->count; i++) {
        if (from[i] == -1)
            continue;
        store_copy_append(&sql, used++ > 0 ? ", " : "");
        store_copy_append_identifier(&sql, target->items[i].name);
    }
    store_copy_append(&sql, ") VALUES ");
    for (int r = 0; r < rows; r++) {
        store_copy_append(&sql, r > 0 ? ", (" : "(");
        for (int c = 0; c < used; c++)
            store_copy_append(&sql, c > 0 ? ", ?%d" : "?%d", r * used + c + 1);
        store_copy_append(&sql, ")");
    }
    if (sql.failed) {
        free(sql.text);
        return NULL;
    }
    return sql.text;
}

/* Copies the rows of one table in one transaction of the target. */
static mitilog_status store_copy_rows(const store_copy_side *source, const store_copy_side *target,
                                      const char *table, int has_rowid, int vocabulary,
                                      const store_copy_columns *source_columns,
                                      const store_copy_columns *target_columns, long long *copied,
                                      mitilog_error *error)
{
    *copied = 0;
    /* from[i]: the source column giving target column i; -1 none (the
     * target's default); -2 the instance's first_received_at (PostgreSQL
     * keeps it beside an instance's rows for their month partition). */
    int *from = calloc((size_t)target_columns->count + 1, sizeof *from);
    if (from == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", table);
    int used = 0;
    mitilog_status status = MITILOG_OK;
    for (int i = 0; i < target_columns->count && status == MITILOG_OK; i++) {
        const store_copy_column *column = &target_columns->items[i];
        from[i] = store_copy_column_index(source_columns, column->name);
        if (from[i] < 0 && strcmp(column->name, "first_received_at") == 0 &&
            store_copy_column_index(source_columns, "instance_id") >= 0)
            from[i] = -2;
        if (from[i] < 0 && from[i] != -2 && column->required)
            status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                       "column %s.%s of the PostgreSQL schema has no value in "
                                       "the SQLite database; the two schemas differ",
                                       table, column->name);
        if (from[i] != -1)
            used++;
    }
    for (int i = 0; i < source_columns->count && status == MITILOG_OK; i++)
        if (store_copy_column_index(target_columns, source_columns->items[i].name) < 0)
            status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                       "column %s.%s of the SQLite database has no counterpart "
                                       "in the PostgreSQL schema; the two schemas differ",
                                       table, source_columns->items[i].name);
    if (status != MITILOG_OK || used == 0) {
        free(from);
        return status;
    }

    /* The source's rows, its columns in the order the target takes them. */
    store_copy_text select = {0};
    store_copy_append(&select, "SELECT ");
    int listed = 0;
    for (int i = 0; i < target_columns->count; i++) {
        if (from[i] == -1)
            continue;
        store_copy_append(&select, listed++ > 0 ? ", " : "");
        if (from[i] == -2) {
            store_copy_append(&select, "(SELECT i.first_received_at FROM instances i "
                                       "WHERE i.id = t.instance_id)");
        } else {
            store_copy_append(&select, "t.");
            store_copy_append_identifier(&select, target_columns->items[i].name);
        }
    }
    store_copy_append(&select, " FROM ");
    store_copy_append_identifier(&select, table);
    store_copy_append(&select, " AS t%s", has_rowid ? " ORDER BY t.rowid" : "");

    int batch_rows = STORE_COPY_BATCH_PARAMETERS / used;
    if (batch_rows > STORE_COPY_BATCH_ROWS)
        batch_rows = STORE_COPY_BATCH_ROWS;
    if (batch_rows < 1)
        batch_rows = 1;
    /* The source is read in one read transaction (begin.sql on it), so
     * that its count and its rows are of one snapshot: full batches go
     * through one INSERT of batch_rows rows, the rest through one INSERT
     * of exactly as many rows. */
    long long total = 0;
    int source_reading = 0, in_transaction = 0;
    store_statement *reader = NULL, *full = NULL, *last = NULL;
    store_copy_blobs blobs = {0};
    if (select.failed)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", table);
    if (status == MITILOG_OK)
        status = store_copy_script(source, "begin.sql", error);
    source_reading = status == MITILOG_OK;
    if (status == MITILOG_OK)
        status = store_copy_count(source, table, &total, error);
    long long full_rows = total - total % batch_rows;
    int last_rows = (int)(total % batch_rows);
    if (status == MITILOG_OK)
        status = source->engine->prepare(source->connection, "copy: read rows", select.text,
                                         &reader, error);
    for (int pass = 0; pass < 2 && status == MITILOG_OK; pass++) {
        int rows = pass == 0 ? batch_rows : last_rows;
        if (rows == 0 || (pass == 0 && full_rows == 0))
            continue;
        char *text = store_copy_insert_text(table, target_columns, from, rows);
        if (text == NULL)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", table);
        else
            status = target->engine->prepare(
                target->connection, pass == 0 ? "copy: insert rows" : "copy: insert the last rows",
                text, pass == 0 ? &full : &last, error);
        free(text);
    }
    if (status == MITILOG_OK)
        status = store_copy_script(target, "begin.sql", error);
    in_transaction = status == MITILOG_OK;
    if (status == MITILOG_OK && vocabulary) {
        store_copy_text sql = {0};
        store_copy_append(&sql, "DELETE FROM ");
        store_copy_append_identifier(&sql, table);
        status = sql.failed ? mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory")
                            : store_copy_run(target, "copy: replace vocabulary", sql.text, error);
        free(sql.text);
    }
    long long read = 0;
    int in_batch = 0, has_row = 0;
    while (status == MITILOG_OK &&
           (status = source->engine->step(reader, &has_row, error)) == MITILOG_OK && has_row) {
        if (read >= total) {
            read++;
            break;
        }
        store_statement *insert = read < full_rows ? full : last;
        int rows = read < full_rows ? batch_rows : last_rows;
        for (int c = 0; c < used && status == MITILOG_OK; c++)
            status = store_copy_bind(source, reader, c, target, insert, in_batch * used + c + 1,
                                     &blobs, error);
        read++;
        if (status == MITILOG_OK && ++in_batch == rows) {
            int ignored = 0;
            status = target->engine->step(insert, &ignored, error);
            target->engine->reset(insert);
            store_copy_blobs_clear(&blobs);
            if (status == MITILOG_OK)
                *copied += in_batch;
            in_batch = 0;
        }
    }
    if (status == MITILOG_OK && (read != total || *copied != total))
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                   "%s changed while it was read (%lld rows counted, %lld read); "
                                   "copy from a database no program is writing",
                                   table, total, read);
    if (status == MITILOG_OK && in_transaction) {
        status = store_copy_script(target, "commit.sql", error);
        in_transaction = 0;
    }
    if (in_transaction) {
        mitilog_error ignored;
        store_copy_script(target, "rollback.sql", &ignored);
    }
    source->engine->finalize(reader);
    if (source_reading) {
        mitilog_error ignored;
        store_copy_script(source, "rollback.sql", &ignored);
    }
    target->engine->finalize(full);
    target->engine->finalize(last);
    store_copy_blobs_clear(&blobs);
    free(blobs.items);
    free(select.text);
    free(from);
    if (status != MITILOG_OK && strstr(error->text, table) == NULL) {
        mitilog_error inner = *error;
        mitilog_error_set(error, status, "copying %s: %s", table, inner.text);
    }
    return status;
}

static int store_copy_is_vocabulary(const char *table)
{
    for (size_t i = 0; i < sizeof store_copy_vocabulary / sizeof store_copy_vocabulary[0]; i++)
        if (strcmp(store_copy_vocabulary[i], table) == 0)
            return 1;
    return 0;
}

/* The key columns of a table by the source's primary key, in key order;
 * every column when it has none. */
static mitilog_status store_copy_keys(const store_copy_columns *columns, store_copy_columns *keys,
                                      mitilog_error *error)
{
    memset(keys, 0, sizeof *keys);
    int key_count = 0;
    for (int i = 0; i < columns->count; i++)
        if (columns->items[i].key > 0)
            key_count++;
    int count = key_count > 0 ? key_count : columns->count;
    keys->items = calloc((size_t)count + 1, sizeof *keys->items);
    if (keys->items == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "keys: out of memory");
    for (int i = 0; i < columns->count; i++) {
        int position = key_count > 0 ? columns->items[i].key - 1 : i;
        if (position < 0 || position >= count)
            continue;
        keys->items[position].name = strdup(columns->items[i].name);
        if (keys->items[position].name == NULL) {
            keys->count = count;
            store_copy_columns_free(keys);
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "keys: out of memory");
        }
    }
    keys->count = count;
    return MITILOG_OK;
}

/* Rows of a table the target has and the source lacks; 0 when none. */
static mitilog_status store_copy_refuse_data(const store_copy_side *target,
                                             const store_copy_tables *target_tables,
                                             const store_copy_tables *source_tables,
                                             mitilog_error *error)
{
    for (int i = 0; i < target_tables->count; i++) {
        const char *table = target_tables->names[i];
        if (store_copy_is_vocabulary(table) || strcmp(table, "schema_version") == 0)
            continue;
        if (store_copy_table_index(source_tables, table) < 0 && strcmp(table, "instance_keys") != 0)
            continue;
        long long rows = 0;
        mitilog_status status = store_copy_count(target, table, &rows, error);
        if (status != MITILOG_OK)
            return status;
        if (rows > 0)
            return mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                                     "the PostgreSQL database already holds data (%lld rows in "
                                     "%s); copy only into a new, empty database (createdb, or "
                                     "CREATE DATABASE ... TEMPLATE template0 LOCALE 'C.UTF-8'), "
                                     "nothing was copied",
                                     rows, table);
    }
    return MITILOG_OK;
}

/* Copies, then verifies, every table the source has. */
static mitilog_status store_copy_tables_all(const store_copy_side *source,
                                            const store_copy_side *target,
                                            const store_copy_tables *source_tables,
                                            const store_copy_tables *target_tables,
                                            store_copy_report report, void *context,
                                            store_copy_summary *summary, mitilog_error *error)
{
    mitilog_status status = MITILOG_OK;
    /* The copy, in the target's order (a table after those it refers to). */
    for (int i = 0; i < target_tables->count && status == MITILOG_OK; i++) {
        const char *table = target_tables->names[i];
        int at = store_copy_table_index(source_tables, table);
        if (at < 0)
            continue;
        store_copy_columns source_columns = {0}, target_columns = {0};
        long long copied = 0;
        status = store_copy_list_columns(source, table, &source_columns, error);
        if (status == MITILOG_OK)
            status = store_copy_list_columns(target, table, &target_columns, error);
        if (status == MITILOG_OK)
            status = store_copy_rows(source, target, table, source_tables->has_rowid[at],
                                     store_copy_is_vocabulary(table), &source_columns,
                                     &target_columns, &copied, error);
        store_copy_columns_free(&source_columns);
        store_copy_columns_free(&target_columns);
    }
    int keys_table = store_copy_table_index(target_tables, "instance_keys") >= 0 &&
                     store_copy_table_index(source_tables, "instance_keys") < 0;
    if (status == MITILOG_OK && keys_table) {
        status = store_copy_script(target, "begin.sql", error);
        if (status == MITILOG_OK)
            status = store_copy_script(target, "instance_keys_fill.sql", error);
        if (status == MITILOG_OK)
            status = store_copy_script(target, "commit.sql", error);
        else {
            mitilog_error ignored;
            store_copy_script(target, "rollback.sql", &ignored);
        }
    }
    if (status == MITILOG_OK)
        status = store_copy_script(target, "sequences_reset.sql", error);
    if (status == MITILOG_OK)
        status = store_copy_script(target, "analyze.sql", error);

    /* The verification: rows and key checksum of each table on both sides. */
    long long instances = -1;
    for (int i = 0; i < target_tables->count && status == MITILOG_OK; i++) {
        const char *table = target_tables->names[i];
        int at = store_copy_table_index(source_tables, table);
        store_copy_table result = {.name = table};
        if (at < 0)
            continue;
        {
            store_copy_columns columns = {0}, keys = {0};
            status = store_copy_list_columns(source, table, &columns, error);
            if (status == MITILOG_OK)
                status = store_copy_keys(&columns, &keys, error);
            if (status == MITILOG_OK)
                status = store_copy_checksum(source, table, &keys, &result.source_rows,
                                             &result.source_checksum, error);
            if (status == MITILOG_OK)
                status = store_copy_checksum(target, table, &keys, &result.target_rows,
                                             &result.target_checksum, error);
            store_copy_columns_free(&columns);
            store_copy_columns_free(&keys);
            result.matches = result.source_rows == result.target_rows &&
                             result.source_checksum == result.target_checksum;
            if (strcmp(table, "instances") == 0)
                instances = result.source_rows;
            summary->rows += result.target_rows;
        }
        if (status != MITILOG_OK)
            break;
        summary->tables++;
        if (!result.matches)
            summary->mismatched_tables++;
        if (report != NULL)
            report(context, &result);
    }
    if (status == MITILOG_OK && keys_table && instances >= 0) {
        /* Filled from instances: one row per instance. */
        store_copy_table result = {.name = "instance_keys", .source_rows = -1};
        status = store_copy_count(target, "instance_keys", &result.target_rows, error);
        result.matches = result.target_rows == instances;
        if (status == MITILOG_OK) {
            summary->tables++;
            summary->rows += result.target_rows;
            if (!result.matches)
                summary->mismatched_tables++;
            if (report != NULL)
                report(context, &result);
        }
    }
    return status;
}

mitilog_status store_copy_database(const char *sqlite_path, const char *conninfo,
                                   int busy_timeout_ms, store_copy_report report, void *context,
                                   store_copy_summary *summary, mitilog_error *error)
{
    memset(summary, 0, sizeof *summary);
    store_copy_side source = {&store_engine_sqlite, NULL, "the SQLite database", 0};
    store_copy_side target = {&store_engine_postgresql, NULL, "the PostgreSQL database", 1};
    store_copy_tables source_tables = {0}, target_tables = {0};
    int source_version = 0, target_version = -1;
    char server_version[32];

    mitilog_status status =
        source.engine->open(sqlite_path, 1, busy_timeout_ms, &source.connection, error);
    if (status != MITILOG_OK) {
        mitilog_error inner = *error;
        mitilog_error_set(error, status,
                          "cannot read the SQLite database %s (%s); give the path of an "
                          "existing mitilog database file",
                          sqlite_path, inner.text);
    }
    if (status == MITILOG_OK) {
        store_statement *statement = NULL;
        int has_row = 0;
        const char *text = sql_file_text("queries/database/schema_version.sql");
        status = text == NULL
                     ? mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND,
                                         "queries/database/schema_version.sql is not built in")
                     : source.engine->prepare(source.connection, "schema version", text, &statement,
                                              error);
        if (status == MITILOG_OK)
            status = source.engine->step(statement, &has_row, error);
        if (status == MITILOG_OK)
            source_version = has_row ? (int)source.engine->column_integer(statement, 0) : 0;
        source.engine->finalize(statement);
        if (status != MITILOG_OK) {
            mitilog_error inner = *error;
            mitilog_error_set(error, status, "%s is not a database mitilog can read: %s",
                              sqlite_path, inner.text);
        }
    }
    if (status == MITILOG_OK && source_version < 1)
        status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                   "%s holds no mitilog data (schema version 0): nothing to copy",
                                   sqlite_path);
    if (status == MITILOG_OK && source_version != store_postgresql_latest_migration())
        status = mitilog_error_set(
            error, MITILOG_ERROR_REFUSED,
            "%s is at schema version %d and this mitilog's is %d; %s, then copy again", sqlite_path,
            source_version, store_postgresql_latest_migration(),
            source_version < store_postgresql_latest_migration()
                ? "open it once with this mitilog (for example `mitilog report stats --config "
                  "FILE`, which migrates it)"
                : "copy it with the mitilog that wrote it, or a newer one");
    /* The target: its schema version before anything is changed. */
    if (status == MITILOG_OK)
        status = store_engine_postgresql_ping(conninfo, &target_version, server_version,
                                              sizeof server_version, error);
    if (status == MITILOG_OK && target_version >= 0 && target_version != source_version)
        status = mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                                   "the PostgreSQL database is at schema version %d and %s at "
                                   "%d; copy only into a new, empty database, nothing was copied",
                                   target_version, sqlite_path, source_version);
    if (status == MITILOG_OK)
        status = target.engine->open(conninfo, 0, busy_timeout_ms, &target.connection, error);
    if (status == MITILOG_OK)
        status =
            store_postgresql_migrate(target.connection, busy_timeout_ms, &target_version, error);
    if (status == MITILOG_OK && target_version != source_version)
        status = mitilog_error_set(error, MITILOG_ERROR_REFUSED,
                                   "the PostgreSQL database came to schema version %d, %s is at "
                                   "%d; nothing was copied",
                                   target_version, sqlite_path, source_version);
    if (status == MITILOG_OK)
        status = store_copy_list_tables(&source, &source_tables, error);
    if (status == MITILOG_OK)
        status = store_copy_list_tables(&target, &target_tables, error);
    for (int i = 0; i < source_tables.count && status == MITILOG_OK; i++)
        if (store_copy_table_index(&target_tables, source_tables.names[i]) < 0)
            status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                       "table %s of %s has no counterpart in the PostgreSQL "
                                       "schema (version %d); nothing was copied",
                                       source_tables.names[i], sqlite_path, target_version);
    if (status == MITILOG_OK)
        status = store_copy_refuse_data(&target, &target_tables, &source_tables, error);
    summary->schema_version = source_version;
    if (status == MITILOG_OK)
        status = store_copy_tables_all(&source, &target, &source_tables, &target_tables, report,
                                       context, summary, error);
    store_copy_tables_free(&source_tables);
    store_copy_tables_free(&target_tables);
    target.engine->close(target.connection);
    source.engine->close(source.connection);
    return status;
}
