/*
 * store_reports.c - the period reads behind statistics, outliers and
 * reports (store_reports.h): plain rows for src/report/, from
 * sql/queries/reports/, on the read connection under reader_lock.
 */
#include "store/store_reports.h"

#include <stdio.h>

#include <stdlib.h>
#include <string.h>

#include "store/store_internal.h"

/* Column text copied (NULL stays NULL); sets *failed on allocation
 * failure. */
static char *store_text_copy(store_query *query, int column, int *failed)
{
    return store_column_copy(query, column, failed);
}

/* A real column; *present (may be NULL) says it was not NULL. */
static double store_double(store_query *query, int column, int *present)
{
    int null = store_column_is_null(query, column);
    if (present != NULL)
        *present = !null;
    return null ? 0.0 : store_column_real(query, column);
}

/* Begins cached statement name on the reader and binds the two days.
 * Call under lock. */
static void store_period_query(store *st, store_query *query, const char *name,
                               const char *from_day, const char *to_day)
{
    store_query_begin(query, &st->reader, name);
    store_bind_text_at(query, 1, from_day);
    store_bind_text_at(query, 2, to_day);
}

/* The reason of a failed period query. */
static mitilog_status store_period_error(mitilog_error *error, const char *what,
                                         const store_query *query)
{
    return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", what, query->error.text);
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
static char *store_list_text(store_exam_list *list, store_query *statement, int column, int *failed)
{
    const char *text = store_column_text(statement, column);
    if (text == NULL)
        return NULL;
    /* NUL-terminated by SQLite; its consumers read C strings. */
    size_t length = strlen(text) + 1;
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
    EXAM_WORST_SEVERITY
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
    switch (columns &
            (STORE_EXAM_ROOM | STORE_EXAM_PRESET | STORE_EXAM_SHIFT | STORE_EXAM_TRANSDUCER)) {
    case 0: return "";
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
    return NULL;
}

/* A count column (never negative). */
static size_t store_count(store_query *statement, int column)
{
    long long value = store_column_integer(statement, column);
    return value > 0 ? (size_t)value : 0;
}

/* One row of the chosen query. */
static int exam_row_read(store_exam_list *list, exam_row *row, store_query *statement,
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
    store_query query;
    store_period_query(st, &query, name, from_day, to_day);
    store_bind_real_at(&query, 3, exam_ti_ladder[EXAM_TI_STATISTICS_STEPS - 1]);
    exam_row *row = NULL;
    while (store_query_step(&query)) {
        /* An exam's rows come one after another: one search per exam. */
        const char *uid = store_column_text(&query, 0);
        if (uid == NULL) {
            row = NULL;
            continue;
        }
        if (row == NULL || strcmp(row->study_instance_uid, uid) != 0) {
            exam_row key = {.study_instance_uid = uid};
            row = bsearch(&key, list->rows, list->count, sizeof *list->rows, store_compare_rows);
        }
        double threshold = store_column_real(&query, 1);
        for (int k = 0; row != NULL && k < EXAM_TI_STATISTICS_STEPS; k++)
            if (exam_ti_ladder[k] == threshold)
                row->seconds_at_or_above[k] = store_column_real(&query, 2);
    }
    if (store_query_end(&query) != MITILOG_OK)
        return store_period_error(error, name, &query);
    return MITILOG_OK;
}

static mitilog_status store_load_exams(store *st, store_exam_query query, const char *from_day,
                                       const char *to_day, unsigned columns, store_exam_list *list,
                                       mitilog_error *error)
{
    static const char *const names[] = {
        "queries/reports/stats_exam_rows.sql", "queries/reports/stats_exam_values.sql",
        "queries/reports/stats_exam_governing.sql", "queries/reports/stats_exam_series.sql"};
    memset(list, 0, sizeof *list);
    if (st == NULL || from_day == NULL || to_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_load_exam_rows: no store or period");
    size_t capacity = 0;
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    /* The rows and their times from one snapshot. */
    int timed = query == STORE_QUERY_ROWS || query == STORE_QUERY_VALUES;
    int in_transaction = 0;
    if (timed) {
        status = store_link_script(&st->reader, "queries/database/read_begin.sql", error);
        in_transaction = status == MITILOG_OK;
    }
    store_query statement;
    store_period_query(st, &statement, names[query], from_day, to_day);
    if (query == STORE_QUERY_VALUES)
        store_bind_text_at(&statement, 3, store_key_name(columns));
    while (status == MITILOG_OK && store_query_step(&statement)) {
        exam_row *row = store_list_add(list, &capacity);
        if (row == NULL || exam_row_read(list, row, &statement, columns, query))
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam rows: out of memory");
    }
    if (store_query_end(&statement) != MITILOG_OK && status == MITILOG_OK)
        status = store_period_error(error, "query exam rows", &statement);
    /* Sorted here rather than by the query: SQLite's sorter copied every
     * row into a record and back, about as much work as the scan. */
    if (status == MITILOG_OK && query != STORE_QUERY_GOVERNING && list->count > 1)
        qsort(list->rows, list->count, sizeof *list->rows, store_compare_rows);
    if (status == MITILOG_OK && timed)
        status = store_load_time_at_or_above(st, from_day, to_day, list, error);
    if (in_transaction) {
        mitilog_status ended = store_link_script(&st->reader, "queries/database/read_end.sql",
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
                                    unsigned columns, store_exam_list *list, mitilog_error *error)
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
    return store_load_exams(st, query, from_day, to_day, columns, list, error);
}

mitilog_status store_load_exam_governing(store *st, const char *from_day, const char *before_day,
                                         store_exam_list *list, mitilog_error *error)
{
    return store_load_exams(st, STORE_QUERY_GOVERNING, from_day, before_day, 0, list, error);
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
                                         store_finding_counts *counts, mitilog_error *error)
{
    memset(counts, 0, sizeof *counts);
    if (st == NULL || from_day == NULL || to_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_load_finding_counts: no store or period");
    size_t capacity = 0;
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query, *statement = &query;
    store_period_query(st, &query, "queries/reports/stats_finding_counts.sql", from_day, to_day);
    while (status == MITILOG_OK && store_query_step(&query)) {
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
    if (store_query_end(&query) != MITILOG_OK && status == MITILOG_OK)
        status = store_period_error(error, "query finding counts", &query);
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
                                      store_period_info *info, mitilog_error *error)
{
    memset(info, 0, sizeof *info);
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_load_period_info: no store");
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query, *statement = &query;
    store_period_query(st, &query, "queries/reports/stats_policy_info.sql",
                       from_day ? from_day : "0000-00-00", to_day ? to_day : "9999-99-99");
    {
        if (!store_query_step(&query)) {
            status = store_period_error(error, "query period information", &query);
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
    store_query_end(&query);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK)
        store_period_info_free(info);
    return status;
}

mitilog_status store_load_day_range(store *st, char **first_day, char **last_day,
                                    mitilog_error *error)
{
    *first_day = NULL;
    *last_day = NULL;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_load_day_range: no store");
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query, *statement = &query;
    store_query_begin(&query, &st->reader, "queries/reports/stats_day_range.sql");
    {
        if (!store_query_step(&query)) {
            status = store_period_error(error, "query exam days", &query);
        } else {
            int failed = 0;
            *first_day = store_text_copy(statement, 0, &failed);
            *last_day = store_text_copy(statement, 1, &failed);
            if (failed)
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "exam days: out of memory");
        }
    }
    store_query_end(&query);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        free(*first_day);
        free(*last_day);
        *first_day = *last_day = NULL;
    }
    return status;
}

mitilog_status store_load_baseline_span(store *st, const char *from_day, const char *before_day,
                                        store_span *span, mitilog_error *error)
{
    memset(span, 0, sizeof *span);
    if (st == NULL || from_day == NULL || before_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "baseline span: no store or days");
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_period_query(st, &query, "queries/reports/baseline_span.sql", from_day, before_day);
    if (!store_query_step(&query)) {
        status = store_period_error(error, "query baseline span", &query);
    } else {
        const char *first = store_column_text(&query, 0);
        const char *last = store_column_text(&query, 1);
        snprintf(span->first_day, sizeof span->first_day, "%s", first != NULL ? first : "");
        snprintf(span->last_day, sizeof span->last_day, "%s", last != NULL ? last : "");
        span->weeks = (long)store_column_integer(&query, 2);
        span->exams = (long)store_column_integer(&query, 3);
    }
    store_query_end(&query);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}
