/*
 * store_reviews.c - the review history (migration 012) and the review
 * worklist: appending a review on the writer connection (inside the
 * group-commit queue's transaction), reading the history as JSON or CSV,
 * the week's worklist, the operator view and the real span of a weekly
 * baseline on the read connection.
 *
 * Statements here are prepared for one call and finalized at its end:
 * reviews are a few a day, and the connections' statement caches are
 * kept for the paths that run thousands of times.
 */
#include "store/store_internal.h"

#include <stdio.h>
#include <string.h>

static int store_bind_text_or_null(sqlite3_stmt *statement, int index, const char *text)
{
    if (text == NULL || text[0] == '\0')
        return sqlite3_bind_null(statement, index);
    return sqlite3_bind_text(statement, index, text, -1, SQLITE_TRANSIENT);
}

mitilog_status store_write_review(store *st, const store_review *review, mitilog_error *error)
{
    sqlite3_stmt *insert = NULL;
    mitilog_status status =
        store_prepare(st->writer, "queries/reviews/review_insert.sql", &insert, error);
    if (status != MITILOG_OK)
        return status;
    int rc = store_bind_text_or_null(insert, 1, review->study_instance_uid);
    if (rc == SQLITE_OK)
        rc = review->finding_id > 0 ? sqlite3_bind_int64(insert, 2, review->finding_id)
                                    : sqlite3_bind_null(insert, 2);
    if (rc == SQLITE_OK)
        rc = sqlite3_bind_text(insert, 3, review->outcome, -1, SQLITE_TRANSIENT);
    if (rc == SQLITE_OK)
        rc = sqlite3_bind_text(insert, 4, review->comment != NULL ? review->comment : "", -1,
                               SQLITE_TRANSIENT);
    if (rc == SQLITE_OK)
        rc = sqlite3_bind_text(insert, 5, review->reviewer, -1, SQLITE_TRANSIENT);
    if (rc == SQLITE_OK)
        rc = sqlite3_bind_text(insert, 6, review->role, -1, SQLITE_TRANSIENT);
    if (rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "review: bind: %s",
                                   sqlite3_errstr(rc));
    else if (sqlite3_step(insert) != SQLITE_DONE)
        status = store_sql_error(error, st->writer, "review");
    else if (sqlite3_changes(st->writer) == 0)
        status =
            review->finding_id > 0
                ? mitilog_error_set(
                      error, MITILOG_ERROR_NOT_FOUND, "no finding %lld%s%s", review->finding_id,
                      review->study_instance_uid != NULL ? " in study " : "",
                      review->study_instance_uid != NULL ? review->study_instance_uid : "")
                : mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "no study %s",
                                    review->study_instance_uid);
    sqlite3_finalize(insert);
    return status;
}

/* Runs a one-row, one-column query on the read connection (bound by
 * bind) and copies the text into *out. */
static mitilog_status store_read_text(store *st, const char *name, const char *const *texts,
                                      int count, const store_sites *sites, const char *what,
                                      char **out, mitilog_error *error)
{
    *out = NULL;
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status = store_prepare(st->reader, name, &statement, error);
    if (status == MITILOG_OK) {
        int rc = SQLITE_OK;
        for (int i = 0; rc == SQLITE_OK && i < count; i++)
            rc = store_bind_text_or_null(statement, i + 1, texts[i]);
        if (rc == SQLITE_OK)
            rc = store_bind_sites(statement, sites);
        if (rc != SQLITE_OK)
            status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: bind: %s", what,
                                       sqlite3_errstr(rc));
        else if (sqlite3_step(statement) != SQLITE_ROW)
            status = store_sql_error(error, st->reader, what);
        else
            status = store_column_dup(statement, out, error);
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_reviews_text(store *st, const char *study, const char *from, const char *to,
                                  int csv, char **out, mitilog_error *error)
{
    if (st == NULL || out == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_reviews_text: no store");
    const char *texts[] = {study, from, to};
    return store_read_text(
        st, csv ? "queries/reviews/reviews_csv.sql" : "queries/reviews/reviews_json.sql", texts, 3,
        NULL, "query reviews", out, error);
}

mitilog_status store_worklist_json(store *st, const char *monday, int is_default,
                                   const store_sites *sites, char **json, mitilog_error *error)
{
    if (st == NULL || json == NULL || monday == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_worklist_json: no store");
    const char *texts[] = {monday, is_default ? "1" : "0"};
    return store_read_text(st, "queries/reviews/review_worklist.sql", texts, 2, sites,
                           "query worklist", json, error);
}

mitilog_status store_operators_json(store *st, const char *from, const char *to,
                                    const store_sites *sites, char **json, mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_operators_json: no store");
    const char *texts[] = {from, to};
    return store_read_text(st, "queries/reviews/review_operators.sql", texts, 2, sites,
                           "query operators", json, error);
}

mitilog_status store_load_baseline_span(store *st, const char *from_day, const char *before_day,
                                        const store_sites *sites, store_span *span,
                                        mitilog_error *error)
{
    memset(span, 0, sizeof *span);
    if (st == NULL || from_day == NULL || before_day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "baseline span: no store or days");
    pthread_mutex_lock(&st->reader_lock);
    sqlite3_stmt *statement = NULL;
    mitilog_status status =
        store_prepare(st->reader, "queries/reports/baseline_span.sql", &statement, error);
    if (status == MITILOG_OK) {
        int rc = sqlite3_bind_text(statement, 1, from_day, -1, SQLITE_TRANSIENT);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_text(statement, 2, before_day, -1, SQLITE_TRANSIENT);
        if (rc == SQLITE_OK)
            rc = store_bind_sites(statement, sites);
        if (rc != SQLITE_OK || sqlite3_step(statement) != SQLITE_ROW) {
            status = store_sql_error(error, st->reader, "query baseline span");
        } else {
            const char *first = (const char *)sqlite3_column_text(statement, 0);
            const char *last = (const char *)sqlite3_column_text(statement, 1);
            snprintf(span->first_day, sizeof span->first_day, "%s", first != NULL ? first : "");
            snprintf(span->last_day, sizeof span->last_day, "%s", last != NULL ? last : "");
            span->weeks = (long)sqlite3_column_int64(statement, 2);
            span->exams = (long)sqlite3_column_int64(statement, 3);
        }
    }
    sqlite3_finalize(statement);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}
