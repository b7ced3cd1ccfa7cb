/*
 * store_internal.h - what the files of src/store/ share; not API.
 *
 * store_open.c  opens the connections and applies the migrations;
 * store_sql.c   prepares and runs the embedded SQL files;
 * store_write.c group commit on the writer connection;
 * store_read.c  the JSON queries on the read connection.
 */
#ifndef MITILOG_STORE_INTERNAL_H
#define MITILOG_STORE_INTERNAL_H

#include <pthread.h>
#include <sqlite3.h>

#include "extract/ext_exam.h"
#include "store/store.h"
#include "util/hash_table.h"

/* One queued write: a caller's record (or rejection) and, once the batch
 * that holds it has committed or failed, its result. Lives on the caller's
 * stack while the caller waits. */
typedef struct store_request {
    const ext_record *record;                    /* exactly one of record ...     */
    const store_bytes *header;                   /* record's header copy, or NULL */
    const struct store_reading_request *reading; /* record's pixels, or NULL */
    long long instance_id;                       /* record: the row written       */
    char *stale_spool;                           /* record: malloc'd, or NULL     */
    const store_rejection *rejection;            /* ... rejection ...             */
    const store_exam *exam;                      /* ... exam ...                  */
    const store_evaluation *evaluation;          /* ... evaluation ...            */
    const store_policy *policy;                  /* ... policy ...                */
    /* ... or a write of its own (screen profiles): custom runs in the
     * open transaction with custom_context. */
    mitilog_status (*custom)(struct store *st, const void *context, mitilog_error *error);
    const void *custom_context;
    const store_review *review;     /* ... review ...                */
    store_evaluation_counts counts; /* evaluation: what it did       */
    mitilog_status status;
    store_put_outcome outcome;
    mitilog_error error;
    int done; /* under queue_lock              */
    struct store_request *next;
} store_request;

/* Statements of the writer connection; used only by the current leader. */
typedef struct store_write_statements {
    sqlite3_stmt *begin;
    sqlite3_stmt *commit;
    sqlite3_stmt *rollback;
    sqlite3_stmt *upsert_instance;
    sqlite3_stmt *insert_rejection;
    sqlite3_stmt *delete_sr_values;
    sqlite3_stmt *insert_sr_value;
    sqlite3_stmt *upsert_exam;
    sqlite3_stmt *delete_timeline;
    sqlite3_stmt *delete_mode_maxima;
    sqlite3_stmt *insert_timeline;
    sqlite3_stmt *insert_mode_maximum;
    sqlite3_stmt *upsert_header;
    sqlite3_stmt *delete_header;
    sqlite3_stmt *summary_delete; /* the exam summary refresh, in order */
    sqlite3_stmt *summary_insert;
    sqlite3_stmt *times_delete;
    sqlite3_stmt *times_insert;
} store_write_statements;

/* Statements of the read connection; used under reader_lock. */
typedef struct store_read_statements {
    sqlite3_stmt *instances_by_study;
    sqlite3_stmt *instances_since;
    sqlite3_stmt *studies;
    sqlite3_stmt *health;
    sqlite3_stmt *study_load;
    sqlite3_stmt *study_detail;
} store_read_statements;

/* Statements prepared once per connection and kept for the store's life
 * (store_cached_statement); used under the lock of their connection. */
enum { STORE_CACHE_MAX = 48 };
typedef struct store_cache {
    const char *names[STORE_CACHE_MAX];
    sqlite3_stmt *statements[STORE_CACHE_MAX];
    size_t count;
} store_cache;

struct store {
    sqlite3 *writer;
    store_cache writer_cache; /* used by the batch leader only */
    store_write_statements write;
    pthread_mutex_t queue_lock;
    pthread_cond_t queue_changed; /* a batch finished              */
    store_request *queue_head;
    store_request *queue_tail;
    int leader_active; /* a caller is writing a batch   */

    sqlite3 *reader;
    store_read_statements read;
    store_cache reader_cache; /* under reader_lock             */
    pthread_mutex_t reader_lock;

    int schema_version;
    char active_policy[65]; /* under reader_lock; "" = none  */

    pthread_mutex_t parameter_lock;
    hash_table parameter_indices; /* under parameter_lock          */

    /* Findings queued for notification (store_notifications.c); set
     * before any evaluation is written, read-only afterwards. */
    int notify_minimum_rank; /* 0: none */
    int notify_webhook, notify_syslog;
};

/* store_write.c: runs request (with its custom write) in a batch of the
 * writer, waiting until it has committed or failed. */
mitilog_status store_submit_custom(struct store *st,
                                   mitilog_status (*custom)(struct store *st, const void *context,
                                                            mitilog_error *error),
                                   const void *context, mitilog_error *error);

/* store_sql.c */
mitilog_status store_sql_error(mitilog_error *error, sqlite3 *db, const char *what);
mitilog_status store_prepare(sqlite3 *db, const char *name, sqlite3_stmt **statement,
                             mitilog_error *error);
/* The statement of built-in SQL file name on db, prepared on its first use
 * and kept in cache (one cache per connection, used under that
 * connection's lock): parsing the SQL again for every call cost more than
 * running it. Give it back with store_release(), never finalize it;
 * store_cache_finalize() does that at close. */
mitilog_status store_cached_statement(store_cache *cache, sqlite3 *db, const char *name,
                                      sqlite3_stmt **statement, mitilog_error *error);
/* sqlite3_bind_parameter_index() remembered in the store, by statement
 * and name: binding an instance by the names of its ~90 parameters spent
 * more instructions on finding them than on the insert. Only for
 * statements that live until store_close() (the caches above and the
 * writer's statements); statements prepared for one call bind by
 * position. store_close() calls store_parameter_forget() before it
 * finalizes them, so a later statement at the same address is never
 * answered from an older one's memory. */
enum {
    STORE_PARAMETER_ENTRIES = 4096
}; /* remembered at most: statements
                                            x parameters, a few hundred
                                            today; a bound, not a goal */
int store_parameter_index(store *st, sqlite3_stmt *statement, const char *name);
void store_parameter_forget(store *st);
/* Resets a cached statement and clears its bindings (NULL: nothing). */
void store_release(sqlite3_stmt *statement);
void store_cache_finalize(store_cache *cache);
mitilog_status store_exec_file(sqlite3 *db, const char *name, mitilog_error *error);
mitilog_status store_exec_text(sqlite3 *db, const char *name, const char *text,
                               mitilog_error *error);
/* Steps a prepared statement without results to SQLITE_DONE, resets it. */
int store_step_done(sqlite3_stmt *statement);
/* Copies column 0 of the current row into a malloc'ed string. */
mitilog_status store_column_dup(sqlite3_stmt *statement, char **out, mitilog_error *error);

/* store_write.c */
mitilog_status store_write_prepare(store *store, mitilog_error *error);
void store_write_finalize(store *store);
/* Blocks until no batch is being written and the queue is empty. */
void store_write_drain(store *store);

/* store_reviews.c: appends request->review in the open transaction. */
mitilog_status store_write_review(store *store, const store_review *review, mitilog_error *error);

/* store_write_context.c: an instance's modes, SR values and header copy
 * (header may be NULL), after its row (instance_id) was written; inside
 * the batch's transaction. */
mitilog_status store_write_context(store *store, const ext_record *record,
                                   const store_bytes *header, sqlite3_int64 instance_id,
                                   mitilog_error *error);
/* store_reading.c: an instance's queue row and reading state, after its
 * row; inside the batch's transaction. replaced: the row existed before,
 * so its older queue row and reading are dropped first (a new row has
 * none: two statements saved per object). *stale_spool: as in
 * store_put_instance_read(). */
mitilog_status store_write_reading(store *store, const struct store_reading_request *reading,
                                   sqlite3_int64 instance_id, int replaced, char **stale_spool,
                                   mitilog_error *error);
/* store_write_exam.c: one exam with its timeline and mode maxima. */
mitilog_status store_write_exam(store *store, const store_exam *exam, mitilog_error *error);
/* 1 if text is well-formed UTF-8 (store_write.c). */
int store_is_text_utf8(const char *text);
/* Binding helpers shared by the writers (store_write_context.c). */
int store_bind_text_named(store *st, sqlite3_stmt *statement, const char *name, const char *value);
int store_bind_double_named(store *st, sqlite3_stmt *statement, const char *name, int present,
                            double value);
int store_bind_int_named(store *st, sqlite3_stmt *statement, const char *name, sqlite3_int64 value);

/* store_findings.c: inside the batch's transaction. */
mitilog_status store_write_evaluation(store *store, const store_evaluation *evaluation,
                                      store_evaluation_counts *counts, mitilog_error *error);
mitilog_status store_write_policy(store *store, const store_policy *policy, mitilog_error *error);

/* store_read.c */
mitilog_status store_read_prepare(store *store, mitilog_error *error);
void store_read_finalize(store *store);

/* For fault injection in tests only (e.g. PRAGMA query_only, max_page_count
 * on the writer); call only while no store_put_* is running. */
sqlite3 *store_writer_connection(store *store);

#endif
