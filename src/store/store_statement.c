/*
 * store_statement.c - the statement and binding layer (store_statement.h):
 * SQL text per engine, one statement cache and one parameter memo per
 * connection, and queries that keep their first failure.
 */
#include "store/store_statement.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "store/sql_files.h"
#include "store/store.h"

enum {
    /* Remembered at most: statements x parameters, a few hundred today;
     * a bound, not a goal. */
    STORE_PARAMETER_ENTRIES = 4096,
    STORE_PARAMETER_NAME_MAX = 256,
    STORE_SQL_NAME_MAX = 512
};

const char *store_sql_text(const store_engine *engine, const char *name)
{
    if (engine != NULL && strcmp(engine->name, "sqlite") != 0) {
        /* "queries/<subject>/NAME.sql" -> "queries/<subject>/<engine>/NAME.sql" */
        const char *slash = strrchr(name, '/');
        char override[STORE_SQL_NAME_MAX];
        int length = slash == NULL
                         ? snprintf(override, sizeof override, "%s/%s", engine->name, name)
                         : snprintf(override, sizeof override, "%.*s/%s%s", (int)(slash - name),
                                    name, engine->name, slash);
        if (length > 0 && (size_t)length < sizeof override) {
            const char *text = sql_file_text(override);
            if (text != NULL)
                return text;
        }
    }
    return sql_file_text(name);
}

mitilog_status store_link_open(store_link *link, const store_engine *engine, const char *target,
                               int read_only, int busy_timeout_ms, mitilog_error *error)
{
    memset(link, 0, sizeof *link);
    link->engine = engine;
    hash_table_init(&link->statements, 0);
    hash_table_init(&link->parameters, STORE_PARAMETER_ENTRIES);
    return engine->open(target, read_only, busy_timeout_ms, &link->connection, error);
}

void store_link_close(store_link *link)
{
    if (link == NULL || link->engine == NULL)
        return;
    for (size_t i = 0; i < link->statements.slot_count; i++) {
        const hash_entry *entry = &link->statements.slots[i];
        if (entry->key != NULL)
            link->engine->finalize((store_statement *)(uintptr_t)entry->pointer);
    }
    hash_table_free(&link->statements);
    hash_table_free(&link->parameters);
    if (link->connection != NULL)
        link->engine->close(link->connection);
    link->connection = NULL;
}

mitilog_status store_link_script_text(store_link *link, const char *name, const char *sql,
                                      mitilog_error *error)
{
    return link->engine->execute_script(link->connection, name, sql, error);
}

mitilog_status store_link_script(store_link *link, const char *name, mitilog_error *error)
{
    const char *text = store_sql_text(link->engine, name);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "SQL file %s is not built in",
                                 name);
    return store_link_script_text(link, name, text, error);
}

long long store_link_changes(store_link *link) { return link->engine->changes(link->connection); }

int store_link_in_transaction(store_link *link)
{
    return link->engine->in_transaction(link->connection);
}

/* The cached statement of name, prepared on its first use. */
static mitilog_status store_link_statement(store_link *link, const char *name,
                                           store_statement **out, mitilog_error *error)
{
    size_t length = strlen(name);
    const hash_entry *entry = hash_table_find(&link->statements, name, length);
    if (entry != NULL) {
        *out = (store_statement *)(uintptr_t)entry->pointer;
        return MITILOG_OK;
    }
    const char *text = store_sql_text(link->engine, name);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "SQL file %s is not built in",
                                 name);
    store_statement *statement = NULL;
    mitilog_status status = link->engine->prepare(link->connection, name, text, &statement, error);
    if (status != MITILOG_OK)
        return status;
    if (hash_table_put(&link->statements, name, length, 0, statement) != MITILOG_OK) {
        link->engine->finalize(statement);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", name);
    }
    *out = statement;
    return MITILOG_OK;
}

/* The index of parameter name, remembered by statement and name. */
static int store_link_parameter(store_link *link, store_statement *statement, const char *name)
{
    /* The key: the statement's address, then the name's bytes. */
    unsigned char key[sizeof statement + STORE_PARAMETER_NAME_MAX];
    size_t length = strlen(name);
    if (length > STORE_PARAMETER_NAME_MAX)
        return link->engine->parameter_index(statement, name);
    memcpy(key, &statement, sizeof statement);
    memcpy(key + sizeof statement, name, length);
    size_t key_size = sizeof statement + length;
    const hash_entry *entry = hash_table_find(&link->parameters, key, key_size);
    if (entry != NULL)
        return (int)entry->number;
    int index = link->engine->parameter_index(statement, name);
    /* Out of memory: not remembered; asked again next time. */
    (void)hash_table_put(&link->parameters, key, key_size, (uint64_t)index, NULL);
    return index;
}

mitilog_status store_query_begin(store_query *query, store_link *link, const char *name)
{
    query->link = link;
    query->statement = NULL;
    query->name = name;
    query->has_row = 0;
    query->error.text[0] = '\0';
    query->status = store_link_statement(link, name, &query->statement, &query->error);
    return query->status;
}

mitilog_status store_query_end(store_query *query)
{
    if (query->statement != NULL)
        query->link->engine->reset(query->statement);
    query->has_row = 0;
    return query->status;
}

int store_query_has_parameter(store_query *query, const char *name)
{
    return query->statement != NULL &&
           store_link_parameter(query->link, query->statement, name) > 0;
}

/* The index of name, or 0 with the query failed. */
static int store_query_index(store_query *query, const char *name)
{
    if (query->status != MITILOG_OK)
        return 0;
    int index = store_link_parameter(query->link, query->statement, name);
    if (index == 0)
        query->status =
            mitilog_error_set(&query->error, MITILOG_ERROR_DATABASE, "no parameter %s", name);
    return index;
}

void store_bind_text_at(store_query *query, int index, const char *text)
{
    if (query->status != MITILOG_OK)
        return;
    const store_engine *engine = query->link->engine;
    query->status = text == NULL ? engine->bind_null(query->statement, index, &query->error)
                                 : engine->bind_text(query->statement, index, text, strlen(text),
                                                     &query->error);
}

void store_bind_filter_at(store_query *query, int index, const char *text)
{
    store_bind_text_at(query, index, text != NULL && text[0] != '\0' ? text : NULL);
}

void store_bind_integer_at(store_query *query, int index, long long value)
{
    if (query->status == MITILOG_OK)
        query->status =
            query->link->engine->bind_integer(query->statement, index, value, &query->error);
}

void store_bind_real_at(store_query *query, int index, double value)
{
    if (query->status == MITILOG_OK)
        query->status =
            query->link->engine->bind_real(query->statement, index, value, &query->error);
}

void store_bind_null_at(store_query *query, int index)
{
    if (query->status == MITILOG_OK)
        query->status = query->link->engine->bind_null(query->statement, index, &query->error);
}

void store_bind_text(store_query *query, const char *name, const char *text)
{
    int index = store_query_index(query, name);
    if (index > 0)
        store_bind_text_at(query, index, text);
}

void store_bind_integer(store_query *query, const char *name, long long value)
{
    int index = store_query_index(query, name);
    if (index > 0)
        store_bind_integer_at(query, index, value);
}

void store_bind_real(store_query *query, const char *name, int present, double value)
{
    int index = store_query_index(query, name);
    if (index == 0)
        return;
    if (!present || !isfinite(value))
        store_bind_null_at(query, index);
    else
        store_bind_real_at(query, index, value);
}

void store_bind_null(store_query *query, const char *name)
{
    int index = store_query_index(query, name);
    if (index > 0)
        store_bind_null_at(query, index);
}

void store_bind_blob(store_query *query, const char *name, const void *data, size_t size)
{
    int index = store_query_index(query, name);
    if (index > 0)
        query->status =
            query->link->engine->bind_blob(query->statement, index, data, size, &query->error);
}

int store_query_step(store_query *query)
{
    query->has_row = 0;
    if (query->status != MITILOG_OK)
        return 0;
    query->status = query->link->engine->step(query->statement, &query->has_row, &query->error);
    return query->status == MITILOG_OK && query->has_row;
}

mitilog_status store_query_run(store_query *query)
{
    while (store_query_step(query))
        continue;
    return query->status;
}

int store_column_count(store_query *query)
{
    return query->link->engine->column_count(query->statement);
}

int store_column_is_null(store_query *query, int column)
{
    return query->link->engine->column_type(query->statement, column) == STORE_VALUE_NULL;
}

long long store_column_integer(store_query *query, int column)
{
    return query->link->engine->column_integer(query->statement, column);
}

double store_column_real(store_query *query, int column)
{
    return query->link->engine->column_real(query->statement, column);
}

const char *store_column_text(store_query *query, int column)
{
    return query->link->engine->column_text(query->statement, column);
}

const void *store_column_blob(store_query *query, int column)
{
    return query->link->engine->column_blob(query->statement, column);
}

size_t store_column_bytes(store_query *query, int column)
{
    return query->link->engine->column_bytes(query->statement, column);
}

char *store_column_copy(store_query *query, int column, int *failed)
{
    const char *text = store_column_text(query, column);
    if (text == NULL)
        return NULL;
    size_t length = store_column_bytes(query, column);
    char *copy = malloc(length + 1);
    if (copy == NULL) {
        *failed = 1;
        return NULL;
    }
    memcpy(copy, text, length);
    copy[length] = '\0';
    return copy;
}

mitilog_status store_query_text(store_query *query, const char *what, int not_found, char **out,
                                mitilog_error *error)
{
    *out = NULL;
    mitilog_status status;
    if (store_query_step(query)) {
        const char *text = store_column_text(query, 0);
        size_t length = store_column_bytes(query, 0);
        char *copy = text != NULL ? malloc(length + 1) : NULL;
        if (text == NULL) {
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "query gave no text");
        } else if (copy == NULL) {
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                       "out of memory for a %zu-byte result", length);
        } else {
            memcpy(copy, text, length);
            copy[length] = '\0';
            *out = copy;
            status = MITILOG_OK;
        }
    } else if (query->status != MITILOG_OK) {
        status =
            mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", what, query->error.text);
    } else if (not_found) {
        status = mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "%s: none", what);
    } else {
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: no row", what);
    }
    store_query_end(query);
    return status;
}

void store_texts_free(char **texts, size_t count)
{
    for (size_t i = 0; texts != NULL && i < count; i++)
        free(texts[i]);
    free(texts);
}

mitilog_status store_query_texts(store_query *query, char ***texts, size_t *count,
                                 mitilog_error *error)
{
    *texts = NULL;
    *count = 0;
    size_t capacity = 0;
    mitilog_status status = MITILOG_OK;
    while (status == MITILOG_OK && store_query_step(query)) {
        if (store_column_text(query, 0) == NULL)
            continue;
        if (*count == capacity) {
            size_t grown = capacity ? capacity * 2 : 16;
            char **array = realloc(*texts, grown * sizeof *array);
            if (array == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
                break;
            }
            *texts = array;
            capacity = grown;
        }
        int failed = 0;
        (*texts)[*count] = store_column_copy(query, 0, &failed);
        if (failed)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
        else
            (*count)++;
    }
    if (store_query_end(query) != MITILOG_OK && status == MITILOG_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", query->name,
                                   query->error.text);
    if (status != MITILOG_OK) {
        store_texts_free(*texts, *count);
        *texts = NULL;
        *count = 0;
    }
    return status;
}
