/*
 * store_engine_postgresql.c - the PostgreSQL engine (store_engine.h) over
 * libpq: the only file of mitilog that calls PQ* for the store.
 *
 * Statements are prepared on the server (PQprepare) once per connection
 * and run with PQexecPrepared; their SQLite-style parameters are rewritten
 * to $N first (store_postgresql_text.h). Parameters travel as text, blobs
 * as binary; results come back as text and are typed by their column's
 * type: int2/int4/int8/oid and bool are integers (a bool is 1 or 0, as
 * SQLite has no other), float4/float8 are reals, numeric is an integer
 * when its text has no fraction or exponent (PostgreSQL's sum() and
 * count arithmetic of integers give numeric where SQLite gives an
 * integer) and a real otherwise, bytea a blob, everything else text.
 *
 * A lost server (the connection is gone, or the server says it is
 * shutting down) makes the failing call report connection_lost; the next
 * request reconnects (PQreset) and prepares its statement again, so that
 * a receiver recovers by itself once the server is back. A transaction
 * that was open when the server went away is gone with it: until the
 * caller ends it (ROLLBACK) or begins another (BEGIN), every statement of
 * the connection fails as lost, and its COMMIT in particular, so that
 * nothing of it is ever reported committed. A COMMIT that PostgreSQL
 * turns into a rollback (the transaction had failed) is an error too.
 *
 * Ownership: open() gives a connection freed by close(); prepare() gives
 * a statement freed by finalize() (before the connection). Bound texts are
 * copied; blobs are borrowed until reset, as the seam allows.
 */
#include "store/store_engine.h"
#include "store/store_engine_postgresql.h"

#include <libpq-fe.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "store/store_postgresql_text.h"
#include "util/log.h"

/* Type OIDs of PostgreSQL's built-in types (src/include/catalog/pg_type.dat;
 * stable across versions). */
enum {
    STORE_PG_BOOL = 16,
    STORE_PG_BYTEA = 17,
    STORE_PG_INT8 = 20,
    STORE_PG_INT2 = 21,
    STORE_PG_INT4 = 23,
    STORE_PG_OID = 26,
    STORE_PG_FLOAT4 = 700,
    STORE_PG_FLOAT8 = 701,
    STORE_PG_NUMERIC = 1700
};

typedef enum store_pg_kind {
    STORE_PG_KIND_OTHER = 0,
    STORE_PG_KIND_BEGIN,
    STORE_PG_KIND_COMMIT,
    STORE_PG_KIND_ROLLBACK
} store_pg_kind;

struct store_connection {
    PGconn *connection;
    int read_only;
    int lock_timeout_ms;
    int lost;                  /* the last error was the server going away */
    int broken;                /* lost inside a transaction, not yet ended */
    unsigned generation;       /* bumped at each (re)connection */
    unsigned statement_number; /* names the server-side statements */
    long long changes;
};

struct store_statement {
    store_connection *connection;
    char *name;                 /* the SQL file, for messages */
    char server_name[32];       /* the prepared statement's name on the server */
    store_postgresql_text text; /* $N text and parameter names */
    store_pg_kind kind;
    unsigned prepared_generation; /* 0: not prepared on the current connection */
    char **values;                /* [parameter_count]; NULL = SQL NULL */
    int *lengths;
    int *formats;
    char **owned; /* values this statement allocated */
    PGresult *result;
    int row; /* the current row; -1 before the first */
    int rows;
    char **decoded; /* [columns] of the current row: bytea bytes, or NULL */
    size_t *decoded_lengths;
    int decoded_columns;
};

/* Notices ("there is no transaction in progress") go to the debug log,
 * not to stderr. */
static void store_pg_notice(void *context, const char *message)
{
    (void)context;
    size_t length = strlen(message);
    while (length > 0 && message[length - 1] == '\n')
        length--;
    log_debug("database notice: %.*s", (int)length, message);
}

/* The message of the server or of libpq, without its trailing newline. */
static const char *store_pg_message(PGconn *connection, const PGresult *result, char *buffer,
                                    size_t size)
{
    const char *text = NULL;
    if (result != NULL)
        text = PQresultErrorField(result, PG_DIAG_MESSAGE_PRIMARY);
    if (text == NULL || text[0] == '\0')
        text = connection != NULL ? PQerrorMessage(connection) : "out of memory";
    snprintf(buffer, size, "%s", text != NULL && text[0] != '\0' ? text : "unknown error");
    /* libpq's messages run over lines ("...failed: Connection refused\n\tIs
     * the server running..."): one line for the log. */
    for (char *p = buffer; *p != '\0'; p++)
        if (*p == '\n' || *p == '\t')
            *p = ' ';
    size_t length = strlen(buffer);
    while (length > 0 && buffer[length - 1] == ' ')
        buffer[--length] = '\0';
    return buffer;
}

/* 1 when a failure means the server went away: the connection is bad, or
 * SQLSTATE class 08 (connection exception) or 57P01..57P03 (the server
 * shut down, crashed or is not accepting connections yet). */
static int store_pg_is_lost(PGconn *connection, const PGresult *result)
{
    if (connection == NULL || PQstatus(connection) != CONNECTION_OK)
        return 1;
    const char *state = result != NULL ? PQresultErrorField(result, PG_DIAG_SQLSTATE) : NULL;
    if (state == NULL)
        return result == NULL;
    return strncmp(state, "08", 2) == 0 || strcmp(state, "57P01") == 0 ||
           strcmp(state, "57P02") == 0 || strcmp(state, "57P03") == 0;
}

/* 1 while the session has a transaction open; a connection already gone
 * (PQTRANS_UNKNOWN) was marked lost, and broken when it had one, by the
 * failure that found it gone. */
static int store_pg_transaction_open(PGconn *connection)
{
    PGTransactionStatusType state = PQtransactionStatus(connection);
    return state == PQTRANS_INTRANS || state == PQTRANS_INERROR || state == PQTRANS_ACTIVE;
}

/* Fills error for a failure of what; marks the connection lost when it
 * was (and broken when a transaction was open). */
static mitilog_status store_pg_fail(store_connection *c, const PGresult *result,
                                    int was_in_transaction, const char *what, mitilog_error *error)
{
    char message[MITILOG_ERROR_TEXT_SIZE / 2];
    store_pg_message(c->connection, result, message, sizeof message);
    if (store_pg_is_lost(c->connection, result)) {
        c->lost = 1;
        if (was_in_transaction)
            c->broken = 1;
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "%s: the PostgreSQL server is not reachable (%s); the open "
                                 "transaction, if any, was not committed, and the next request "
                                 "connects again: check that the server is running",
                                 what, message);
    }
    const char *state = result != NULL ? PQresultErrorField(result, PG_DIAG_SQLSTATE) : NULL;
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s%s%s%s", what, message,
                             state != NULL ? " (SQLSTATE " : "", state != NULL ? state : "",
                             state != NULL ? ")" : "");
}

/* Rows changed by an INSERT, UPDATE or DELETE (also one with RETURNING);
 * a SELECT or any other command leaves the count of the last one, as
 * SQLite's sqlite3_changes() does. */
static void store_pg_count_changes(store_connection *c, const PGresult *result)
{
    const char *command = PQcmdStatus((PGresult *)result);
    if (strncmp(command, "INSERT ", 7) == 0 || strncmp(command, "UPDATE ", 7) == 0 ||
        strncmp(command, "DELETE ", 7) == 0)
        c->changes = atoll(PQcmdTuples((PGresult *)result));
}

/* Runs one plain command (no parameters, no rows wanted). */
static mitilog_status store_pg_command(store_connection *c, const char *sql, const char *what,
                                       mitilog_error *error)
{
    PGresult *result = PQexec(c->connection, sql);
    ExecStatusType state = PQresultStatus(result);
    mitilog_status status = MITILOG_OK;
    if (state != PGRES_COMMAND_OK && state != PGRES_TUPLES_OK && state != PGRES_EMPTY_QUERY)
        status = store_pg_fail(c, result, 0, what, error);
    PQclear(result);
    return status;
}

/* What every session of ours starts with: UTC (SQLite's 'now' is UTC),
 * the lock wait bound, no JIT compilation, and for a read connection,
 * read-only transactions. JIT: the planner's estimates for the exam
 * statements of small tables (never analysed) crossed jit_above_cost,
 * and compiling took about 2 s per statement, where running it takes a
 * millisecond; every statement of the store is short. */
static mitilog_status store_pg_session(store_connection *c, mitilog_error *error)
{
    char sql[256];
    /* SQLite's busy timeout 0 means "do not wait"; PostgreSQL's 0 means
     * "wait for ever": the nearest is one millisecond. */
    snprintf(sql, sizeof sql, "SET TimeZone = 'UTC'; SET jit = off; SET lock_timeout = %d%s",
             c->lock_timeout_ms > 0 ? c->lock_timeout_ms : 1,
             c->read_only ? "; SET default_transaction_read_only = on" : "");
    return store_pg_command(c, sql, "session settings", error);
}

/* Reconnects a connection that was lost, unless a transaction lost with
 * it has not been ended yet. */
static mitilog_status store_pg_ensure(store_connection *c, store_pg_kind kind, const char *what,
                                      mitilog_error *error)
{
    if (c->broken && kind != STORE_PG_KIND_BEGIN && kind != STORE_PG_KIND_ROLLBACK) {
        c->lost = 1;
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "%s: the PostgreSQL server went away during this transaction, "
                                 "which was not committed; it must be rolled back and written "
                                 "again",
                                 what);
    }
    if (!c->lost && PQstatus(c->connection) == CONNECTION_OK)
        return MITILOG_OK;
    PQreset(c->connection);
    if (PQstatus(c->connection) != CONNECTION_OK)
        return store_pg_fail(c, NULL, 0, what, error);
    c->generation++;
    c->lost = 0;
    c->broken = 0;
    mitilog_status status = store_pg_session(c, error);
    if (status == MITILOG_OK)
        log_info("database: connected again to the PostgreSQL server");
    return status;
}

static mitilog_status store_pg_open(const char *target, int read_only, int busy_timeout_ms,
                                    store_connection **out, mitilog_error *error)
{
    *out = NULL;
    store_connection *c = calloc(1, sizeof *c);
    if (c == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory connecting");
    c->read_only = read_only;
    c->lock_timeout_ms = busy_timeout_ms;
    c->generation = 1;
    /* Defaults first, so that the same keys in target win: a connection
     * attempt gives up after 10 s (libpq waits for ever by default), and
     * a server that vanished from the network is noticed within about a
     * minute (keepalives), so that the receiver answers A700 rather than
     * hang. */
    static const char *const keys[] = {"connect_timeout",
                                       "keepalives",
                                       "keepalives_idle",
                                       "keepalives_interval",
                                       "keepalives_count",
                                       "dbname",
                                       NULL};
    const char *values[] = {"10", "1", "30", "10", "3", target != NULL ? target : "", NULL};
    c->connection = PQconnectdbParams(keys, values, 1);
    if (c->connection == NULL || PQstatus(c->connection) != CONNECTION_OK) {
        char message[MITILOG_ERROR_TEXT_SIZE / 2];
        store_pg_message(c->connection, NULL, message, sizeof message);
        /* Not the conninfo itself: it may hold a password. */
        mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                          "cannot connect to PostgreSQL: %s; check that the server is running "
                          "and that [storage] connection names it (host, port, database, user)",
                          message);
        PQfinish(c->connection);
        free(c);
        return MITILOG_ERROR_DATABASE;
    }
    PQsetNoticeProcessor(c->connection, store_pg_notice, NULL);
    mitilog_status status = store_pg_session(c, error);
    if (status != MITILOG_OK) {
        PQfinish(c->connection);
        free(c);
        return status;
    }
    *out = c;
    return MITILOG_OK;
}

static void store_pg_close(store_connection *c)
{
    if (c == NULL)
        return;
    PQfinish(c->connection);
    free(c);
}

static store_pg_kind store_pg_statement_kind(const char *sql);

static mitilog_status store_pg_execute_script(store_connection *c, const char *name,
                                              const char *sql, mitilog_error *error)
{
    /* A script that is one BEGIN, COMMIT or ROLLBACK (database/ files)
     * ends a transaction lost with the server as a statement does. */
    store_pg_kind kind = store_pg_statement_kind(sql);
    if (c->broken && kind == STORE_PG_KIND_ROLLBACK) {
        c->broken = 0;
        return MITILOG_OK;
    }
    mitilog_status status = store_pg_ensure(c, kind, name, error);
    if (status != MITILOG_OK)
        return status;
    int was_in_transaction = store_pg_transaction_open(c->connection);
    /* The simple query protocol runs every statement of the text. */
    PGresult *result = PQexec(c->connection, sql);
    ExecStatusType state = PQresultStatus(result);
    if (state != PGRES_COMMAND_OK && state != PGRES_TUPLES_OK && state != PGRES_EMPTY_QUERY)
        status = store_pg_fail(c, result, was_in_transaction, name, error);
    else if (kind == STORE_PG_KIND_COMMIT && strcmp(PQcmdStatus(result), "ROLLBACK") == 0)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                   "%s: the transaction had failed and was rolled back, not "
                                   "committed",
                                   name);
    else
        store_pg_count_changes(c, result);
    PQclear(result);
    return status;
}

/* The first keyword of a statement, past blanks and comments. */
static store_pg_kind store_pg_statement_kind(const char *sql)
{
    const char *p = sql;
    for (;;) {
        while (*p == ' ' || *p == '\t' || *p == '\n' || *p == '\r')
            p++;
        if (p[0] == '-' && p[1] == '-') {
            while (*p != '\0' && *p != '\n')
                p++;
        } else if (p[0] == '/' && p[1] == '*') {
            const char *end = strstr(p + 2, "*/");
            p = end != NULL ? end + 2 : p + strlen(p);
        } else {
            break;
        }
    }
    size_t length = 0;
    while ((p[length] >= 'a' && p[length] <= 'z') || (p[length] >= 'A' && p[length] <= 'Z'))
        length++;
    if ((length == 5 && strncasecmp(p, "BEGIN", 5) == 0) ||
        (length == 5 && strncasecmp(p, "START", 5) == 0))
        return STORE_PG_KIND_BEGIN;
    if ((length == 6 && strncasecmp(p, "COMMIT", 6) == 0) ||
        (length == 3 && strncasecmp(p, "END", 3) == 0))
        return STORE_PG_KIND_COMMIT;
    if (length == 8 && strncasecmp(p, "ROLLBACK", 8) == 0)
        return STORE_PG_KIND_ROLLBACK;
    return STORE_PG_KIND_OTHER;
}

/* Prepares s on the server under its name. */
static mitilog_status store_pg_prepare_on_server(store_statement *s, mitilog_error *error)
{
    store_connection *c = s->connection;
    /* Asked before: once the connection is gone its state is unknown. */
    int was_in_transaction = store_pg_transaction_open(c->connection);
    PGresult *result =
        PQprepare(c->connection, s->server_name, s->text.text, s->text.parameter_count, NULL);
    mitilog_status status = MITILOG_OK;
    if (PQresultStatus(result) != PGRES_COMMAND_OK)
        status = store_pg_fail(c, result, was_in_transaction, s->name, error);
    else
        s->prepared_generation = c->generation;
    PQclear(result);
    return status;
}

static void store_pg_clear_row(store_statement *s)
{
    for (int i = 0; i < s->decoded_columns; i++) {
        PQfreemem(s->decoded[i]);
        s->decoded[i] = NULL;
    }
}

static void store_pg_clear_result(store_statement *s)
{
    store_pg_clear_row(s);
    free(s->decoded);
    free(s->decoded_lengths);
    s->decoded = NULL;
    s->decoded_lengths = NULL;
    s->decoded_columns = 0;
    PQclear(s->result);
    s->result = NULL;
    s->row = -1;
    s->rows = 0;
}

static void store_pg_finalize(store_statement *s)
{
    if (s == NULL)
        return;
    store_pg_clear_result(s);
    store_connection *c = s->connection;
    if (c != NULL && !c->lost && s->prepared_generation == c->generation &&
        PQstatus(c->connection) == CONNECTION_OK &&
        PQtransactionStatus(c->connection) == PQTRANS_IDLE) {
        char sql[64];
        snprintf(sql, sizeof sql, "DEALLOCATE %s", s->server_name);
        PQclear(PQexec(c->connection, sql));
    }
    for (int i = 0; i < s->text.parameter_count; i++)
        free(s->owned[i]);
    free(s->owned);
    free(s->values);
    free(s->lengths);
    free(s->formats);
    store_postgresql_text_free(&s->text);
    free(s->name);
    free(s);
}

static mitilog_status store_pg_prepare(store_connection *c, const char *name, const char *sql,
                                       store_statement **out, mitilog_error *error)
{
    *out = NULL;
    store_statement *s = calloc(1, sizeof *s);
    if (s == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", name);
    s->connection = c;
    s->row = -1;
    s->name = strdup(name != NULL ? name : "statement");
    mitilog_status status = s->name != NULL ? MITILOG_OK : MITILOG_ERROR_MEMORY;
    if (status != MITILOG_OK)
        mitilog_error_set(error, status, "out of memory");
    mitilog_error rewrite_error;
    if (status == MITILOG_OK) {
        status = store_postgresql_rewrite(sql, &s->text, &rewrite_error);
        if (status != MITILOG_OK)
            mitilog_error_set(error, status, "%s: %s", s->name, rewrite_error.text);
    }
    if (status == MITILOG_OK) {
        size_t count = s->text.parameter_count > 0 ? (size_t)s->text.parameter_count : 1;
        s->values = calloc(count, sizeof *s->values);
        s->lengths = calloc(count, sizeof *s->lengths);
        s->formats = calloc(count, sizeof *s->formats);
        s->owned = calloc(count, sizeof *s->owned);
        if (s->values == NULL || s->lengths == NULL || s->formats == NULL || s->owned == NULL)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", s->name);
    }
    if (status == MITILOG_OK) {
        s->kind = store_pg_statement_kind(s->text.text);
        snprintf(s->server_name, sizeof s->server_name, "mitilog_%u", ++c->statement_number);
        status = store_pg_ensure(c, s->kind, s->name, error);
    }
    if (status == MITILOG_OK)
        status = store_pg_prepare_on_server(s, error);
    if (status != MITILOG_OK) {
        store_pg_finalize(s);
        return status;
    }
    *out = s;
    return MITILOG_OK;
}

static int store_pg_parameter_index(store_statement *s, const char *name)
{
    return store_postgresql_text_index(&s->text, name);
}

/* Replaces parameter index with value (owned: freed with the statement). */
static mitilog_status store_pg_bind(store_statement *s, int index, char *owned, const char *value,
                                    int length, int format, mitilog_error *error)
{
    if (index < 1 || index > s->text.parameter_count) {
        free(owned);
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "bind: parameter %d of %s is out of range (it has %d)", index,
                                 s->name, s->text.parameter_count);
    }
    free(s->owned[index - 1]);
    s->owned[index - 1] = owned;
    s->values[index - 1] = (char *)value;
    s->lengths[index - 1] = length;
    s->formats[index - 1] = format;
    return MITILOG_OK;
}

static mitilog_status store_pg_bind_null(store_statement *s, int index, mitilog_error *error)
{
    return store_pg_bind(s, index, NULL, NULL, 0, 0, error);
}

static mitilog_status store_pg_bind_integer(store_statement *s, int index, long long value,
                                            mitilog_error *error)
{
    char *text = malloc(24);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "bind: out of memory");
    snprintf(text, 24, "%lld", value);
    return store_pg_bind(s, index, text, text, 0, 0, error);
}

static mitilog_status store_pg_bind_real(store_statement *s, int index, double value,
                                         mitilog_error *error)
{
    char *text = malloc(32);
    if (text == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "bind: out of memory");
    /* 17 significant digits give the same double back (IEEE 754). */
    snprintf(text, 32, "%.17g", value);
    return store_pg_bind(s, index, text, text, 0, 0, error);
}

static mitilog_status store_pg_bind_text(store_statement *s, int index, const char *text,
                                         size_t length, mitilog_error *error)
{
    if (text == NULL)
        return store_pg_bind_null(s, index, error);
    /* Text parameters travel NUL-terminated: a copy. */
    char *copy = malloc(length + 1);
    if (copy == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "bind: out of memory for %zu bytes",
                                 length);
    memcpy(copy, text, length);
    copy[length] = '\0';
    if (memchr(copy, '\0', length) != NULL) {
        free(copy);
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "bind: a text for %s holds a NUL character, which PostgreSQL "
                                 "does not store in text",
                                 s->name);
    }
    return store_pg_bind(s, index, copy, copy, 0, 0, error);
}

static mitilog_status store_pg_bind_blob(store_statement *s, int index, const void *data,
                                         size_t length, mitilog_error *error)
{
    if (length > 0x7fffffff)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "bind: a %zu-byte blob is too long",
                                 length);
    static const char empty[1] = "";
    return store_pg_bind(s, index, NULL, data != NULL ? data : empty, (int)length, 1, error);
}

static mitilog_status store_pg_execute(store_statement *s, mitilog_error *error);

static mitilog_status store_pg_step(store_statement *s, int *has_row, mitilog_error *error)
{
    *has_row = 0;
    if (s->result != NULL) {
        store_pg_clear_row(s);
        if (s->row + 1 < s->rows) {
            s->row++;
            *has_row = 1;
        }
        return MITILOG_OK;
    }
    store_connection *c = s->connection;
    if (c->broken && s->kind == STORE_PG_KIND_ROLLBACK) {
        /* The server dropped the transaction when it went away: ended. */
        c->broken = 0;
        return MITILOG_OK;
    }
    mitilog_status status = store_pg_execute(s, error);
    if (status != MITILOG_OK && c->lost && !c->broken &&
        (s->kind == STORE_PG_KIND_BEGIN || c->read_only)) {
        /* The server went away since the last request (a restart): a
         * BEGIN or a read is safe to run again on a new connection. */
        mitilog_error again;
        status = store_pg_execute(s, &again);
        if (status != MITILOG_OK && error != NULL)
            *error = again;
    }
    if (status != MITILOG_OK)
        return status;
    *has_row = s->rows > 0;
    return MITILOG_OK;
}

/* Runs s (reconnecting and preparing first when needed) and keeps its
 * result. */
static mitilog_status store_pg_execute(store_statement *s, mitilog_error *error)
{
    store_connection *c = s->connection;
    mitilog_status status = store_pg_ensure(c, s->kind, s->name, error);
    if (status != MITILOG_OK)
        return status;
    if (s->prepared_generation != c->generation) {
        status = store_pg_prepare_on_server(s, error);
        if (status != MITILOG_OK)
            return status;
    }
    int was_in_transaction = store_pg_transaction_open(c->connection);
    PGresult *result = PQexecPrepared(c->connection, s->server_name, s->text.parameter_count,
                                      (const char *const *)s->values, s->lengths, s->formats, 0);
    ExecStatusType state = PQresultStatus(result);
    if (state != PGRES_COMMAND_OK && state != PGRES_TUPLES_OK) {
        status = store_pg_fail(c, result, was_in_transaction, s->name, error);
        PQclear(result);
        return status;
    }
    if (s->kind == STORE_PG_KIND_COMMIT && strcmp(PQcmdStatus(result), "ROLLBACK") == 0) {
        PQclear(result);
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE,
                                 "%s: the transaction had failed and was rolled back, not "
                                 "committed",
                                 s->name);
    }
    store_pg_count_changes(c, result);
    s->result = result;
    s->rows = PQntuples(result);
    s->row = 0;
    s->decoded_columns = PQnfields(result);
    if (s->decoded_columns > 0) {
        s->decoded = calloc((size_t)s->decoded_columns, sizeof *s->decoded);
        s->decoded_lengths = calloc((size_t)s->decoded_columns, sizeof *s->decoded_lengths);
        if (s->decoded == NULL || s->decoded_lengths == NULL) {
            store_pg_clear_result(s);
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "%s: out of memory", s->name);
        }
    }
    return MITILOG_OK;
}

static int store_pg_has_value(store_statement *s, int column)
{
    return s->result != NULL && s->row >= 0 && s->row < s->rows && column >= 0 &&
           column < s->decoded_columns;
}

static int store_pg_column_count(store_statement *s)
{
    return s->result != NULL ? PQnfields(s->result) : 0;
}

/* 1 when a numeric's text is a whole number as written ("12", "-3"). */
static int store_pg_numeric_is_integer(const char *text)
{
    if (*text == '-' || *text == '+')
        text++;
    if (*text == '\0' || strlen(text) > 18)
        return 0;
    for (; *text != '\0'; text++)
        if (*text < '0' || *text > '9')
            return 0;
    return 1;
}

static store_value_type store_pg_column_type(store_statement *s, int column)
{
    if (!store_pg_has_value(s, column) || PQgetisnull(s->result, s->row, column))
        return STORE_VALUE_NULL;
    switch (PQftype(s->result, column)) {
    case STORE_PG_BOOL:
    case STORE_PG_INT2:
    case STORE_PG_INT4:
    case STORE_PG_INT8:
    case STORE_PG_OID: return STORE_VALUE_INTEGER;
    case STORE_PG_FLOAT4:
    case STORE_PG_FLOAT8: return STORE_VALUE_REAL;
    case STORE_PG_NUMERIC:
        return store_pg_numeric_is_integer(PQgetvalue(s->result, s->row, column))
                   ? STORE_VALUE_INTEGER
                   : STORE_VALUE_REAL;
    case STORE_PG_BYTEA: return STORE_VALUE_BLOB;
    default: return STORE_VALUE_TEXT;
    }
}

/* The bytes of a bytea value, decoded from its text form once per row. */
static const unsigned char *store_pg_decoded(store_statement *s, int column, size_t *length)
{
    if (s->decoded[column] == NULL) {
        size_t size = 0;
        unsigned char *bytes =
            PQunescapeBytea((const unsigned char *)PQgetvalue(s->result, s->row, column), &size);
        if (bytes == NULL) {
            *length = 0;
            return NULL;
        }
        s->decoded[column] = (char *)bytes;
        s->decoded_lengths[column] = size;
    }
    *length = s->decoded_lengths[column];
    return (const unsigned char *)s->decoded[column];
}

static long long store_pg_column_integer(store_statement *s, int column)
{
    if (!store_pg_has_value(s, column) || PQgetisnull(s->result, s->row, column))
        return 0;
    const char *text = PQgetvalue(s->result, s->row, column);
    switch (PQftype(s->result, column)) {
    case STORE_PG_BOOL: return text[0] == 't';
    case STORE_PG_FLOAT4:
    case STORE_PG_FLOAT8:
    case STORE_PG_NUMERIC: return (long long)strtod(text, NULL);
    default: return strtoll(text, NULL, 10);
    }
}

static double store_pg_column_real(store_statement *s, int column)
{
    if (!store_pg_has_value(s, column) || PQgetisnull(s->result, s->row, column))
        return 0.0;
    const char *text = PQgetvalue(s->result, s->row, column);
    if (PQftype(s->result, column) == STORE_PG_BOOL)
        return text[0] == 't' ? 1.0 : 0.0;
    return strtod(text, NULL);
}

static const char *store_pg_column_text(store_statement *s, int column)
{
    if (!store_pg_has_value(s, column) || PQgetisnull(s->result, s->row, column))
        return NULL;
    const char *text = PQgetvalue(s->result, s->row, column);
    switch (PQftype(s->result, column)) {
    case STORE_PG_BOOL: return text[0] == 't' ? "1" : "0";
    /* A bytea's text is its escaped form (SQLite would hand out the raw
     * bytes); blobs are read with column_blob. */
    default: return text;
    }
}

static const void *store_pg_column_blob(store_statement *s, int column)
{
    if (!store_pg_has_value(s, column) || PQgetisnull(s->result, s->row, column))
        return NULL;
    if (PQftype(s->result, column) == STORE_PG_BYTEA) {
        size_t length = 0;
        return store_pg_decoded(s, column, &length);
    }
    return PQgetvalue(s->result, s->row, column);
}

static size_t store_pg_column_bytes(store_statement *s, int column)
{
    if (!store_pg_has_value(s, column) || PQgetisnull(s->result, s->row, column))
        return 0;
    switch (PQftype(s->result, column)) {
    case STORE_PG_BYTEA: {
        size_t length = 0;
        store_pg_decoded(s, column, &length);
        return length;
    }
    case STORE_PG_BOOL: return 1;
    default: return (size_t)PQgetlength(s->result, s->row, column);
    }
}

static void store_pg_reset(store_statement *s)
{
    if (s == NULL)
        return;
    store_pg_clear_result(s);
    for (int i = 0; i < s->text.parameter_count; i++) {
        free(s->owned[i]);
        s->owned[i] = NULL;
        s->values[i] = NULL;
        s->lengths[i] = 0;
        s->formats[i] = 0;
    }
}

static long long store_pg_changes(store_connection *c) { return c != NULL ? c->changes : 0; }

static int store_pg_connection_lost(store_connection *c) { return c != NULL && c->lost; }

static int store_pg_in_transaction(store_connection *c)
{
    if (c == NULL || c->lost || PQstatus(c->connection) != CONNECTION_OK)
        return 0;
    PGTransactionStatusType state = PQtransactionStatus(c->connection);
    return state == PQTRANS_INTRANS || state == PQTRANS_INERROR || state == PQTRANS_ACTIVE;
}

const store_engine store_engine_postgresql = {
    .name = "postgresql",
    .open = store_pg_open,
    .close = store_pg_close,
    .execute_script = store_pg_execute_script,
    .prepare = store_pg_prepare,
    .parameter_index = store_pg_parameter_index,
    .bind_null = store_pg_bind_null,
    .bind_integer = store_pg_bind_integer,
    .bind_real = store_pg_bind_real,
    .bind_text = store_pg_bind_text,
    .bind_blob = store_pg_bind_blob,
    .step = store_pg_step,
    .column_count = store_pg_column_count,
    .column_type = store_pg_column_type,
    .column_integer = store_pg_column_integer,
    .column_real = store_pg_column_real,
    .column_text = store_pg_column_text,
    .column_blob = store_pg_column_blob,
    .column_bytes = store_pg_column_bytes,
    .reset = store_pg_reset,
    .finalize = store_pg_finalize,
    .changes = store_pg_changes,
    .connection_lost = store_pg_connection_lost,
    .in_transaction = store_pg_in_transaction,
};

mitilog_status store_engine_postgresql_ping(const char *conninfo, int *schema_version,
                                            char *server_version, size_t server_version_size,
                                            mitilog_error *error)
{
    *schema_version = -1;
    if (server_version_size > 0)
        server_version[0] = '\0';
    store_connection *c = NULL;
    mitilog_status status = store_pg_open(conninfo, 1, 5000, &c, error);
    if (status != MITILOG_OK)
        return status;
    int number = PQserverVersion(c->connection);
    if (server_version_size > 0)
        snprintf(server_version, server_version_size, "%d.%d", number / 10000, number % 10000);
    /* schema_version is made by the first store_open (its migrations). */
    PGresult *result = PQexec(c->connection, "SELECT to_regclass('schema_version') IS NOT NULL");
    if (PQresultStatus(result) != PGRES_TUPLES_OK || PQntuples(result) != 1)
        status = store_pg_fail(c, result, 0, "look for the schema version", error);
    else if (PQgetvalue(result, 0, 0)[0] == 't') {
        PQclear(result);
        result = PQexec(c->connection, "SELECT coalesce(max(version), 0) FROM schema_version");
        if (PQresultStatus(result) == PGRES_TUPLES_OK && PQntuples(result) == 1)
            *schema_version = atoi(PQgetvalue(result, 0, 0));
        else
            status = store_pg_fail(c, result, 0, "read the schema version", error);
    }
    PQclear(result);
    store_pg_close(c);
    return status;
}
