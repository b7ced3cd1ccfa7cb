/*
 * store_read_stats.c - the reads behind statistics, outliers and the
 * ingest status (store.h, "Statistics reads"): plain rows for src/report/,
 * from sql/queries/reports/stats_*.sql and instances/ingest_status.sql, on the read
 * connection under reader_lock. Statements are prepared per call (these
 * are reports, not hot paths) so the store's statement table is unchanged.
 */
#include "store/store_internal.h"

#include <stdlib.h>
#include <string.h>

/* Column text copied (NULL stays NULL); sets *failed on allocation
 * failure. */
static char *store_text_copy(sqlite3_stmt *statement, int column, int *failed)
{
    const unsigned char *text = sqlite3_column_text(statement, column);
    if (text == NULL)
        return NULL;
    size_t length = (size_t)sqlite3_column_bytes(statement, column);
    char *copy = malloc(length + 1);
    if (copy == NULL) {
        *failed = 1;
        return NULL;
    }
    memcpy(copy, text, length);
    copy[length] = '\0';
    return copy;
}

/* One call into the connection per column (each sqlite3_column_* call
 * takes the connection's mutex; the value's type and number do not). */
static double store_double(sqlite3_stmt *statement, int column, int *present)
{
    sqlite3_value *value = sqlite3_column_value(statement, column);
    int null = sqlite3_value_type(value) == SQLITE_NULL;
    if (present != NULL)
        *present = !null;
    return null ? 0.0 : sqlite3_value_double(value);
}

/* Prepares name on the reader and binds the two days and the sites (NULL:
 * every site). Call under lock. */
static mitilog_status store_period_statement(store *st, const char *name, const char *from_day,
                                             const char *to_day, const store_sites *sites,
                                             sqlite3_stmt **statement, mitilog_error *error)
{
    mitilog_status status = store_prepare(st->reader, name, statement, error);
    if (status != MITILOG_OK)
        return status;
    if (sqlite3_bind_text(*statement, 1, from_day, -1, SQLITE_TRANSIENT) != SQLITE_OK ||
        sqlite3_bind_text(*statement, 2, to_day, -1, SQLITE_TRANSIENT) != SQLITE_OK ||
        store_bind_sites(*statement, sites) != SQLITE_OK) {
        sqlite3_finalize(*statement);
        *statement = NULL;
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind failed", name);
    }
    return MITILOG_OK;
}

/* The strings of an exam list: blocks of at least 64 KiB, filled in turn,
 * freed together (one allocation per block rather than per string). */
struct store_exam_text_block {
    store_exam_text_block *next;
    size_t used, size;
    char text[];
};
enum { STORE_TEXT_BLOCK_SIZE = 64 * 1024 };

/* Copies a column's text into the list's blocks (NULL stays NULL); sets
 * *failed on allocation failure. */
static char *store_list_text(store_exam_list *list, sqlite3_stmt *statement, int column,
                             int *failed)
{
    const unsigned char *text = sqlite3_column_text(statement, column);
    if (text == NULL)
        return NULL;
    /* NUL-terminated by SQLite; its consumers read C strings. */
    size_t length = strlen((const char *)text) + 1;
    store_exam_text_block *block = list->texts;
    if (block == NULL || block->size - block->used < length) {
        size_t size = length > STORE_TEXT_BLOCK_SIZE ? length : STORE_TEXT_BLOCK_SIZE;
        store_exam_text_block *grown = malloc(sizeof *grown + size);
        if (grown == NULL) {
            *failed = 1;
            return NULL;
        }
        grown->next = block;
        grown->used = 0;
        grown->size = size;
        list->texts = block = grown;
    }
    char *copy = block->text + block->used;
    memcpy(copy, text, length);
    block->used += length;
    return copy;
}

void store_exam_list_free(store_exam_list *list)
{
    if (list == NULL)
        return;
    store_exam_text_block *next;
    for (store_exam_text_block *block = list->texts; block != NULL; block = next) {
        next = block->next;
        free(block);
    }
    free(list->rows);
    memset(list, 0, sizeof *list);
}

/* Appends a zeroed row; NULL when out of memory. */
static exam_row *store_list_add(store_exam_list *list, size_t *capacity)
{
    if (list->count == *capacity) {
        size_t grown_capacity = *capacity ? *capacity * 2 : 256;
        exam_row *grown = realloc(list->rows, grown_capacity * sizeof *grown);
        if (grown == NULL)
            return NULL;
        list->rows = grown;
        *capacity = grown_capacity;
    }
    exam_row *row = &list->rows[list->count++];
    memset(row, 0, sizeof *row);
    return row;
}

/* Columns of stats_exam_rows.sql. */
enum {
    EXAM_UID,
    EXAM_DAY,
    EXAM_TYPE,
    EXAM_TYPE_LABEL,
    EXAM_GOVERNING_INDEX,
    EXAM_MAX_GOVERNING,
    EXAM_MAX_MI,
    EXAM_ROOM,
    EXAM_PRESET,
    EXAM_SHIFT,
    EXAM_TRANSDUCER,
    EXAM_DESCRIPTION,
    EXAM_ESTIMATED,
    EXAM_CAPTURES,
    EXAM_INDEXED,
    EXAM_FINDINGS,
    EXAM_FIRST_ACQUIRED,
    EXAM_INFORMATIONAL,
    EXAM_WORST_SEVERITY,
    EXAM_SITE
};

/* The queries the loader chooses from. */
typedef enum store_exam_query {
    STORE_QUERY_ROWS,      /* stats_exam_rows.sql: every column */
    STORE_QUERY_VALUES,    /* stats_exam_values.sql: type, one key, values */
    STORE_QUERY_GOVERNING, /* stats_exam_governing.sql: type, governing value */
    STORE_QUERY_SERIES     /* stats_exam_series.sql: type, day, room, preset, values */
} store_exam_query;

/* Columns of stats_exam_series.sql. */
enum {
    SERIES_TYPE,
    SERIES_DAY,
    SERIES_ROOM,
    SERIES_PRESET,
    SERIES_MAX_GOVERNING,
    SERIES_CAPTURES,
    SERIES_INDEXED,
    SERIES_UID
};

/* Columns of stats_exam_values.sql. */
enum {
    VALUES_TYPE,
    VALUES_KEY,
    VALUES_MAX_GOVERNING,
    VALUES_MAX_MI,
    VALUES_ESTIMATED,
    VALUES_CAPTURES,
    VALUES_INDEXED,
    VALUES_FINDINGS,
    VALUES_UID,
    VALUES_INFORMATIONAL
};

/* The context column of a single STORE_EXAM_ROOM/PRESET/SHIFT/TRANSDUCER
 * bit, as stats_exam_values.sql names it; "" for none; NULL for several. */
static const char *store_key_name(unsigned columns)
{
    switch (columns & (STORE_EXAM_ROOM | STORE_EXAM_PRESET | STORE_EXAM_SHIFT |
                       STORE_EXAM_TRANSDUCER | STORE_EXAM_SITE)) {
    case 0: return "";
    case STORE_EXAM_SITE: return "site";
    case STORE_EXAM_ROOM: return "room";
    case STORE_EXAM_PRESET: return "preset";
    case STORE_EXAM_SHIFT: return "shift";
    case STORE_EXAM_TRANSDUCER: return "transducer";
    default: return NULL;
    }
}

/* Where a row of stats_exam_values.sql puts its key. */
static const char **store_key_field(exam_row *row, unsigned columns)
{
    if (columns & STORE_EXAM_ROOM)
        return &row->room;
    if (columns & STORE_EXAM_PRESET)
        return &row->preset;
    if (columns & STORE_EXAM_SHIFT)
        return &row->shift;
    if (columns & STORE_EXAM_TRANSDUCER)
        return &row->transducer;
    if (columns & STORE_EXAM_SITE)
        return &row->site;
    return NULL;
}

/* A count column (never negative). */
static size_t store_count(sqlite3_stmt *statement, int column)
{
    sqlite3_int64 value = sqlite3_column_int64(statement, column);
    return value > 0 ? (size_t)value : 0;
}

/* One row of the chosen query. */
static int exam_row_read(store_exam_list *list, exam_row *row, sqlite3_stmt *statement,
                         unsigned columns, store_exam_query query)
{
    int failed = 0;
    if (query == STORE_QUERY_GOVERNING) {
        row->exam_type = store_list_text(list, statement, 0, &failed);
        row->max_governing = store_double(statement, 1, &row->has_governing);
        return failed;
    }
    if (query == STORE_QUERY_SERIES) {
        row->exam_type = store_list_text(list, statement, SERIES_TYPE, &failed);
        row->day = store_list_text(list, statement, SERIES_DAY, &failed);
        if (columns & STORE_EXAM_ROOM)
            row->room = store_list_text(list, statement, SERIES_ROOM, &failed);
        if (columns & STORE_EXAM_PRESET)
            row->preset = store_list_text(list, statement, SERIES_PRESET, &failed);
        row->max_governing = store_double(statement, SERIES_MAX_GOVERNING, &row->has_governing);
        row->capture_count = store_count(statement, SERIES_CAPTURES);
        row->indexed_count = store_count(statement, SERIES_INDEXED);
        row->study_instance_uid = store_list_text(list, statement, SERIES_UID, &failed);
        return failed;
    }
    if (query == STORE_QUERY_VALUES) {
        row->exam_type = store_list_text(list, statement, VALUES_TYPE, &failed);
        const char **key = store_key_field(row, columns);
        if (key != NULL)
            *key = store_list_text(list, statement, VALUES_KEY, &failed);
        row->max_governing = store_double(statement, VALUES_MAX_GOVERNING, &row->has_governing);
        row->max_mi = store_double(statement, VALUES_MAX_MI, &row->has_mi);
        row->estimated_seconds = store_double(statement, VALUES_ESTIMATED, NULL);
        row->capture_count = store_count(statement, VALUES_CAPTURES);
        row->indexed_count = store_count(statement, VALUES_INDEXED);
        row->finding_count = store_count(statement, VALUES_FINDINGS);
        row->informational_count = store_count(statement, VALUES_INFORMATIONAL);
        row->study_instance_uid = store_list_text(list, statement, VALUES_UID, &failed);
        return failed;
    }
    row->exam_type = store_list_text(list, statement, EXAM_TYPE, &failed);
    row->study_instance_uid = store_list_text(list, statement, EXAM_UID, &failed);
    if (columns & (STORE_EXAM_IDENTITY | STORE_EXAM_DAY))
        row->day = store_list_text(list, statement, EXAM_DAY, &failed);
    if (columns & STORE_EXAM_IDENTITY)
        row->first_acquired_at = store_list_text(list, statement, EXAM_FIRST_ACQUIRED, &failed);
    if (columns & STORE_EXAM_DETAIL) {
        row->exam_type_label = store_list_text(list, statement, EXAM_TYPE_LABEL, &failed);
        row->governing_index = store_list_text(list, statement, EXAM_GOVERNING_INDEX, &failed);
        row->study_description = store_list_text(list, statement, EXAM_DESCRIPTION, &failed);
    }
    if (columns & STORE_EXAM_ROOM)
        row->room = store_list_text(list, statement, EXAM_ROOM, &failed);
    if (columns & STORE_EXAM_PRESET)
        row->preset = store_list_text(list, statement, EXAM_PRESET, &failed);
    if (columns & STORE_EXAM_SHIFT)
        row->shift = store_list_text(list, statement, EXAM_SHIFT, &failed);
    if (columns & STORE_EXAM_TRANSDUCER)
        row->transducer = store_list_text(list, statement, EXAM_TRANSDUCER, &failed);
    if (columns & STORE_EXAM_SITE)
        row->site = store_list_text(list, statement, EXAM_SITE, &failed);
    row->max_governing = store_double(statement, EXAM_MAX_GOVERNING, &row->has_governing);
    row->max_mi = store_double(statement, EXAM_MAX_MI, &row->has_mi);
    row->estimated_seconds = store_double(statement, EXAM_ESTIMATED, NULL);
    row->capture_count = store_count(statement, EXAM_CAPTURES);
    row->indexed_count = store_count(statement, EXAM_INDEXED);
    row->finding_count = store_count(statement, EXAM_FINDINGS);
    row->informational_count = store_count(statement, EXAM_INFORMATIONAL);
    row->worst_severity = (int)store_count(statement, EXAM_WORST_SEVERITY);
    return failed;
}

/* Study Instance UID order: SQLite's BINARY collation (memcmp, then
 * length) is strcmp's order on these NUL-free strings; UIDs are unique. */
static int store_compare_rows(const void *left, const void *right)
{
    const exam_row *a = left, *b = right;
    return strcmp(a->study_instance_uid, b->study_instance_uid);
}

/* Puts the times at or above the statistics' thresholds
 * (stats_exam_time_at_or_above.sql) on the rows, sorted by UID. */
static mitilog_status store_load_time_at_or_above(store *st, const char *from_day,
                                                  const char *to_day, store_exam_list *list,
                                                  mitilog_error *error)
{
    static const char name[] = "queries/reports/stats_exam_time_at_or_above.sql";
    sqlite3_stmt *statement = NULL;
    /* Every site: a time of an exam not in the list finds no row. */
    mitilog_status status =
        store_period_statement(st, name, from_day, to_day, NULL, &statement, error);
    if (status == MITILOG_OK &&
        sqlite3_bind_double(statement, 3, exam_ti_ladder[EXAM_TI_STATISTICS_STEPS - 1]) !=
            SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind failed", name);
    int rc = SQLITE_DONE;
    exam_row *row = NULL;
    while (status == MITILOG_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        /* An exam's rows come one after another: one search per exam. */
        const char *uid = (const char *)sqlite3_column_text(statement, 0);
        if (uid == NULL) {
            row = NULL;
            continue;
        }
        if (row == NULL || strcmp(row->study_instance_uid, uid) != 0) {
            exam_row key = {.study_instance_uid = uid};
            row = bsearch(&key, list->rows, list->count, sizeof *list->rows, store_compare_rows);
        }
        double threshold = sqlite3_column_double(statement, 1);
        for (int k = 0; row != NULL && k < EXAM_TI_STATISTICS_STEPS; k++)
            if (exam_ti_ladder[k] == threshold)
                row->seconds_at_or_above[k] = sqlite3_column_double(statement, 2);
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->reader, name);
    sqlite3_finalize(statement);
    return status;
}

static mitilog_status store_load_exams(store *st, store_exam_query query, const char *from_day,
                                       const char *to_day, const store_sites *sites,
                                       unsigned columns, store_exam_list *list,
                                       mitilog_error *error)
{
    static const char *const names[] = {
        "queries/reports/stats_exam_rows.sql", "queries/reports/stats_exam_values.sql",
        "queries/reports/stats_exam_governing.sql", "queries/reports/stats_exam_series.sql"};
    memset(list, 0, sizeof *list);
    if (st == NULL || from_day == NULL || to_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_load_exam_rows: no store or period");
    sqlite3_stmt *statement = NULL;
    size_t capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status =
        store_period_statement(st, names[query], from_day, to_day, sites, &statement, error);
    if (status == MITILOG_OK && query == STORE_QUERY_VALUES &&
        sqlite3_bind_text(statement, 3, store_key_name(columns), -1, SQLITE_STATIC) != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind failed", names[query]);
    /* The rows and their times from one snapshot. */
    int timed = query == STORE_QUERY_ROWS || query == STORE_QUERY_VALUES;
    int in_transaction = 0;
    if (status == MITILOG_OK && timed) {
        status = store_exec_file(st->reader, "queries/database/read_begin.sql", error);
        in_transaction = status == MITILOG_OK;
    }
    int rc = SQLITE_DONE;
    while (status == MITILOG_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        exam_row *row = store_list_add(list, &capacity);
        if (row == NULL || exam_row_read(list, row, statement, columns, query))
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam rows: out of memory");
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->reader, "query exam rows");
    sqlite3_finalize(statement);
    /* Sorted here rather than by the query: SQLite's sorter copied every
     * row into a record and back, about as much work as the scan. */
    if (status == MITILOG_OK && query != STORE_QUERY_GOVERNING && list->count > 1)
        qsort(list->rows, list->count, sizeof *list->rows, store_compare_rows);
    if (status == MITILOG_OK && timed)
        status = store_load_time_at_or_above(st, from_day, to_day, list, error);
    if (in_transaction) {
        mitilog_status ended = store_exec_file(st->reader, "queries/database/read_end.sql",
                                               status == MITILOG_OK ? error : NULL);
        if (status == MITILOG_OK)
            status = ended;
    }
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_exam_list_free(list);
        return status;
    }
    return MITILOG_OK;
}

mitilog_status store_load_exam_rows(store *st, const char *from_day, const char *to_day,
                                    const store_sites *sites, unsigned columns,
                                    store_exam_list *list, mitilog_error *error)
{
    /* Without identity and detail columns and with at most one grouping
     * column, the short rows of stats_exam_values.sql do; the day with
     * room and preset alone, those of stats_exam_series.sql. */
    const unsigned series = STORE_EXAM_DAY | STORE_EXAM_ROOM | STORE_EXAM_PRESET;
    store_exam_query query =
        (columns & STORE_EXAM_DAY) && (columns & ~series) == 0 ? STORE_QUERY_SERIES
        : (columns & (STORE_EXAM_IDENTITY | STORE_EXAM_DETAIL | STORE_EXAM_DAY)) == 0 &&
                store_key_name(columns)
            ? STORE_QUERY_VALUES
            : STORE_QUERY_ROWS;
    return store_load_exams(st, query, from_day, to_day, sites, columns, list, error);
}

mitilog_status store_load_exam_governing(store *st, const char *from_day, const char *before_day,
                                         const store_sites *sites, store_exam_list *list,
                                         mitilog_error *error)
{
    return store_load_exams(st, STORE_QUERY_GOVERNING, from_day, before_day, sites, 0, list, error);
}

void store_finding_counts_free(store_finding_counts *counts)
{
    for (size_t i = 0; i < counts->count; i++) {
        free(counts->study_instance_uids[i]);
        free((char *)counts->counts[i].rule_id);
    }
    free(counts->study_instance_uids);
    free(counts->counts);
    memset(counts, 0, sizeof *counts);
}

mitilog_status store_load_finding_counts(store *st, const char *from_day, const char *to_day,
                                         const store_sites *sites, store_finding_counts *counts,
                                         mitilog_error *error)
{
    memset(counts, 0, sizeof *counts);
    if (st == NULL || from_day == NULL || to_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_load_finding_counts: no store or period");
    sqlite3_stmt *statement = NULL;
    size_t capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status = store_period_statement(st, "queries/reports/stats_finding_counts.sql",
                                                   from_day, to_day, sites, &statement, error);
    int rc = SQLITE_DONE;
    while (status == MITILOG_OK && (rc = sqlite3_step(statement)) == SQLITE_ROW) {
        if (counts->count == capacity) {
            size_t grown_capacity = capacity ? capacity * 2 : 64;
            char **uids = realloc(counts->study_instance_uids, grown_capacity * sizeof *uids);
            if (uids != NULL)
                counts->study_instance_uids = uids;
            exam_rule_count *grown =
                uids == NULL ? NULL : realloc(counts->counts, grown_capacity * sizeof *grown);
            if (grown == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "findings: out of memory");
                break;
            }
            counts->counts = grown;
            capacity = grown_capacity;
        }
        size_t n = counts->count++;
        int failed = 0;
        counts->study_instance_uids[n] = store_text_copy(statement, 0, &failed);
        counts->counts[n].rule_id = store_text_copy(statement, 1, &failed);
        counts->counts[n].count = store_count(statement, 2);
        if (failed)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "findings: out of memory");
    }
    if (status == MITILOG_OK && rc != SQLITE_DONE)
        status = store_sql_error(error, st->reader, "query finding counts");
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK)
        store_finding_counts_free(counts);
    return status;
}

void store_period_info_free(store_period_info *info)
{
    if (info == NULL)
        return;
    free(info->policy_version);
    free(info->policy_name);
    free(info->finding_policy_versions);
    free(info->first_day);
    free(info->last_day);
    memset(info, 0, sizeof *info);
}

mitilog_status store_load_period_info(store *st, const char *from_day, const char *to_day,
                                      const store_sites *sites, store_period_info *info,
                                      mitilog_error *error)
{
    memset(info, 0, sizeof *info);
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_load_period_info: no store");
    sqlite3_stmt *statement = NULL;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status = store_period_statement(
        st, "queries/reports/stats_policy_info.sql", from_day ? from_day : "0000-00-00",
        to_day ? to_day : "9999-99-99", sites, &statement, error);
    if (status == MITILOG_OK) {
        if (sqlite3_step(statement) != SQLITE_ROW) {
            status = store_sql_error(error, st->reader, "query period information");
        } else {
            int failed = 0;
            info->policy_version = store_text_copy(statement, 0, &failed);
            info->policy_name = store_text_copy(statement, 1, &failed);
            info->finding_policy_versions = store_text_copy(statement, 2, &failed);
            info->first_day = store_text_copy(statement, 3, &failed);
            info->last_day = store_text_copy(statement, 4, &failed);
            if (failed)
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY,
                                           "period information: out of memory");
        }
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK)
        store_period_info_free(info);
    return status;
}

mitilog_status store_load_day_range(store *st, const store_sites *sites, char **first_day,
                                    char **last_day, mitilog_error *error)
{
    *first_day = NULL;
    *last_day = NULL;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_load_day_range: no store");
    sqlite3_stmt *statement = NULL;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status =
        store_prepare(st->reader, "queries/reports/stats_day_range.sql", &statement, error);
    if (status == MITILOG_OK) {
        if (store_bind_sites(statement, sites) != SQLITE_OK) {
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "exam days: bind failed");
        } else if (sqlite3_step(statement) != SQLITE_ROW) {
            status = store_sql_error(error, st->reader, "query exam days");
        } else {
            int failed = 0;
            *first_day = store_text_copy(statement, 0, &failed);
            *last_day = store_text_copy(statement, 1, &failed);
            if (failed)
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam days: out of memory");
        }
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        free(*first_day);
        free(*last_day);
        *first_day = *last_day = NULL;
    }
    return status;
}

mitilog_status store_ingest_json(store *st, int window_hours, int silent_hours, int days,
                                 const store_sites *sites, char **json, mitilog_error *error)
{
    *json = NULL;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_ingest_json: no store");
    sqlite3_stmt *statement = NULL;
    pthread_mutex_lock(&st->reader_lock);
    mitilog_status status =
        store_prepare(st->reader, "queries/instances/ingest_status.sql", &statement, error);
    if (status == MITILOG_OK) {
        if (sqlite3_bind_int(statement, 1, window_hours) != SQLITE_OK ||
            sqlite3_bind_int(statement, 2, silent_hours) != SQLITE_OK ||
            sqlite3_bind_int(statement, 3, days) != SQLITE_OK ||
            store_bind_sites(statement, sites) != SQLITE_OK)
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "ingest status: bind");
        else if (sqlite3_step(statement) != SQLITE_ROW)
            status = store_sql_error(error, st->reader, "query ingest status");
        else
            status = store_column_dup(statement, json, error);
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}
