/*
 * store_commit.c - group commit of the writes the subject files submit.
 *
 * Callers queue a request (a write function and its context) and wait.
 * Whoever finds no batch being written becomes the leader: it takes the
 * queued requests (at most STORE_BATCH_MAX), runs their writes on the
 * writer link inside one BEGIN IMMEDIATE ... COMMIT (when one of them
 * fails on its own, the batch is written again one request per
 * transaction, so a bad request fails alone), and wakes every waiter with
 * its own result. So a caller returns only after the commit that holds
 * its write, and many concurrent associations share one WAL sync.
 *
 * If the commit fails (or the engine rolls the transaction back by
 * itself, as SQLite may on a full disk or an I/O error), every request of
 * the batch fails with MITILOG_ERROR_DATABASE and nothing of them is
 * kept; the link is rolled back so that the next batch starts clean.
 */
#include "store/store_internal.h"

#include <stdio.h>

#include "util/log.h"

enum { STORE_BATCH_MAX = 256 };

void store_commit_init(store_commit_queue *queue)
{
    pthread_mutex_init(&queue->lock, NULL);
    pthread_cond_init(&queue->changed, NULL);
    queue->head = queue->tail = NULL;
    queue->leader_active = 0;
}

void store_commit_destroy(store_commit_queue *queue)
{
    pthread_cond_destroy(&queue->changed);
    pthread_mutex_destroy(&queue->lock);
}

/* Runs a statement of no rows (BEGIN, COMMIT, ROLLBACK) on the writer. */
static mitilog_status store_commit_statement(store_link *writer, const char *name, char *message,
                                             size_t size)
{
    store_query query;
    if (store_query_begin(&query, writer, name) == MITILOG_OK)
        store_query_run(&query);
    mitilog_status status = store_query_end(&query);
    if (status != MITILOG_OK && message != NULL)
        snprintf(message, size, "%s", query.error.text);
    return status;
}

/* Fails every request of the batch that has not failed on its own. */
static void store_fail_batch(store_commit_request *batch, const char *what, const char *message)
{
    for (store_commit_request *request = batch; request != NULL; request = request->next) {
        if (request->status == MITILOG_OK)
            request->status =
                mitilog_error_set(&request->error, MITILOG_ERROR_DATABASE, "%s: %s", what, message);
    }
}

/* Ends the open transaction: COMMIT, or ROLLBACK when rollback is set.
 * Returns 0 when committed. */
static int store_end_transaction(store_link *writer, int rollback, char *message, size_t size)
{
    if (rollback) {
        if (store_link_in_transaction(writer))
            store_commit_statement(writer, "queries/database/write_rollback.sql", NULL, 0);
        return -1;
    }
    if (store_commit_statement(writer, "queries/database/write_commit.sql", message, size) ==
        MITILOG_OK)
        return 0;
    if (store_link_in_transaction(writer))
        store_commit_statement(writer, "queries/database/write_rollback.sql", NULL, 0);
    return -1;
}

/* Writes the requests of batch in one transaction. Returns 0 when it
 * committed; -1 when a request failed on its own (the transaction is
 * rolled back, *failed_alone set) or the database failed (rolled back,
 * every request failed with the reason). */
static int store_write_together(store_link *writer, store_commit_request *batch, int *failed_alone)
{
    char message[MITILOG_ERROR_TEXT_SIZE] = "";
    *failed_alone = 0;
    if (store_commit_statement(writer, "queries/database/write_begin.sql", message,
                               sizeof message) != MITILOG_OK) {
        store_fail_batch(batch, "begin transaction", message);
        log_warning("database: cannot begin a write: %s", message);
        return -1;
    }
    for (store_commit_request *request = batch; request != NULL; request = request->next) {
        request->error.text[0] = '\0';
        request->status = request->write(writer, request->context, &request->error);
        if (!store_link_in_transaction(writer)) {
            /* The transaction is gone (full disk, I/O error): nothing of
             * the batch was kept. The request's own message says why. */
            snprintf(message, sizeof message, "%s",
                     request->status != MITILOG_OK ? request->error.text : "rolled back");
            store_fail_batch(batch, "transaction rolled back", message);
            log_warning("database: write transaction rolled back: %s", message);
            return -1;
        }
        if (request->status != MITILOG_OK) {
            *failed_alone = 1;
            store_end_transaction(writer, 1, message, sizeof message);
            return -1;
        }
    }
    if (store_end_transaction(writer, 0, message, sizeof message) == 0)
        return 0;
    for (store_commit_request *request = batch; request != NULL; request = request->next)
        request->status = MITILOG_OK;
    store_fail_batch(batch, "commit", message);
    log_warning("database: commit failed, batch rolled back: %s", message);
    return -1;
}

/* The leader's work: one transaction for the whole batch. A request that
 * fails on its own (a row the schema refuses) rolls the transaction
 * back, and the batch is written again one request per transaction, so
 * that it fails alone: savepoints per request, the other way to get
 * there, made SQLite copy every page a request touched, for the rare case
 * of a failure. Fills in each request's status and error. */
static void store_write_batch(store_link *writer, store_commit_request *batch)
{
    for (store_commit_request *request = batch; request != NULL; request = request->next)
        request->status = MITILOG_OK;
    int failed_alone = 0;
    if (store_write_together(writer, batch, &failed_alone) == 0 || !failed_alone ||
        batch->next == NULL)
        return;
    for (store_commit_request *request = batch; request != NULL; request = request->next) {
        store_commit_request *next = request->next;
        request->next = NULL;
        request->status = MITILOG_OK;
        store_write_together(writer, request, &failed_alone);
        request->next = next;
    }
}

mitilog_status store_commit_submit(store *st, store_write_function write, void *context,
                                   mitilog_error *error)
{
    store_commit_queue *queue = &st->queue;
    store_commit_request request = {.write = write, .context = context};
    request.error.text[0] = '\0';

    pthread_mutex_lock(&queue->lock);
    if (queue->tail != NULL)
        queue->tail->next = &request;
    else
        queue->head = &request;
    queue->tail = &request;
    while (!request.done) {
        if (queue->leader_active) {
            pthread_cond_wait(&queue->changed, &queue->lock);
            continue;
        }
        queue->leader_active = 1;
        store_commit_request *batch = queue->head;
        store_commit_request *last = batch;
        for (int count = 1; count < STORE_BATCH_MAX && last->next != NULL; count++)
            last = last->next;
        queue->head = last->next;
        if (queue->head == NULL)
            queue->tail = NULL;
        last->next = NULL;
        pthread_mutex_unlock(&queue->lock);

        store_write_batch(&st->writer, batch);

        pthread_mutex_lock(&queue->lock);
        while (batch != NULL) {
            store_commit_request *next = batch->next;
            batch->done = 1; /* the waiter may return once we unlock */
            batch = next;
        }
        queue->leader_active = 0;
        pthread_cond_broadcast(&queue->changed);
    }
    pthread_mutex_unlock(&queue->lock);
    if (request.status != MITILOG_OK && error != NULL)
        *error = request.error;
    return request.status;
}

void store_commit_drain(store_commit_queue *queue)
{
    pthread_mutex_lock(&queue->lock);
    while (queue->leader_active || queue->head != NULL)
        pthread_cond_wait(&queue->changed, &queue->lock);
    pthread_mutex_unlock(&queue->lock);
}

void store_commit_hold(store_commit_queue *queue)
{
    pthread_mutex_lock(&queue->lock);
    while (queue->leader_active)
        pthread_cond_wait(&queue->changed, &queue->lock);
}

void store_commit_release(store_commit_queue *queue) { pthread_mutex_unlock(&queue->lock); }
