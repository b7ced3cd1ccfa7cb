/*
 * store_reviews.c - the review history (migration 012) and the review
 * worklist (store_reviews.h): appending a review on the writer link
 * (inside the group-commit queue's transaction), reading the history as
 * JSON or CSV, the week's worklist and the operator view on the read
 * connection. SQL: sql/queries/reviews/.
 */
#include "store/store_reviews.h"

#include "store/store_internal.h"

static mitilog_status store_write_review(store_link *writer, void *context, mitilog_error *error)
{
    const store_review *review = context;
    store_query query;
    store_query_begin(&query, writer, "queries/reviews/review_insert.sql");
    store_bind_filter_at(&query, 1, review->study_instance_uid);
    if (review->finding_id > 0)
        store_bind_integer_at(&query, 2, review->finding_id);
    else
        store_bind_null_at(&query, 2);
    store_bind_text_at(&query, 3, review->outcome);
    store_bind_text_at(&query, 4, review->comment != NULL ? review->comment : "");
    store_bind_text_at(&query, 5, review->reviewer);
    store_bind_text_at(&query, 6, review->role);
    store_query_run(&query);
    mitilog_status status = store_query_end(&query);
    if (status != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "review: %s", query.error.text);
    if (store_link_changes(writer) == 0)
        return review->finding_id > 0
                   ? mitilog_error_set(
                         error, MITILOG_ERROR_NOT_FOUND, "no finding %lld%s%s", review->finding_id,
                         review->study_instance_uid != NULL ? " in study " : "",
                         review->study_instance_uid != NULL ? review->study_instance_uid : "")
                   : mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "no study %s",
                                       review->study_instance_uid);
    return MITILOG_OK;
}

mitilog_status store_put_review(store *st, const store_review *review, mitilog_error *error)
{
    if (st == NULL || review == NULL || review->outcome == NULL || review->reviewer == NULL ||
        review->role == NULL || (review->finding_id <= 0 && review->study_instance_uid == NULL))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "a review needs a finding or a study, an outcome and a reviewer");
    return store_commit_submit(st, store_write_review, (void *)review, error);
}

/* Runs a one-row, one-column query on the read connection (its
 * parameters the filters texts) and copies the text into *out. */
static mitilog_status store_read_text(store *st, const char *name, const char *const *texts,
                                      int count, const char *what, char **out, mitilog_error *error)
{
    *out = NULL;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, name);
    for (int i = 0; i < count; i++)
        store_bind_filter_at(&query, i + 1, texts[i]);
    mitilog_status status = store_query_text(&query, what, 0, out, error);
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
        "query reviews", out, error);
}

mitilog_status store_worklist_json(store *st, const char *monday, int is_default, char **json,
                                   mitilog_error *error)
{
    if (st == NULL || json == NULL || monday == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_worklist_json: no store");
    const char *texts[] = {monday, is_default ? "1" : "0"};
    return store_read_text(st, "queries/reviews/review_worklist.sql", texts, 2, "query worklist",
                           json, error);
}

mitilog_status store_operators_json(store *st, const char *from, const char *to, char **json,
                                    mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_operators_json: no store");
    const char *texts[] = {from, to};
    return store_read_text(st, "queries/reviews/review_operators.sql", texts, 2, "query operators",
                           json, error);
}
