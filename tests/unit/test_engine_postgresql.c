/* The PostgreSQL engine (store/store_engine_postgresql.h) against a real
 * server: the schema migrations, the typed columns, the instance upsert
 * through instance_keys, and a lost connection. Needs
 * MITILOG_TEST_POSTGRESQL, the conninfo of a server where this user may
 * create databases (tests/postgresql/cluster.sh start prints one); without
 * it every case is skipped and says so. Each run works in a database of
 * its own, dropped at the end.
 *
 * Expectations: the column types follow SQLite's storage classes
 * (sqlite.org/datatype3.html, section 2) for the values PostgreSQL's
 * types carry (PostgreSQL documentation, chapter 8 "Data Types"); a
 * transaction of a lost connection is never committed (PostgreSQL
 * documentation, section 55.2.1 "a session ... terminated ... rolls back
 * the open transaction"); the rest is the contract of the header (common
 * practice, no source). */
#include <pthread.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

#include "store/sql_files.h"
#include "store/store_engine_postgresql.h"

typedef struct fixture {
    char server[512];   /* the conninfo given */
    char database[512]; /* the conninfo of this run's database */
    char name[64];
} fixture;

static const store_engine *pg = &store_engine_postgresql;

static void run(store_connection *c, const char *sql)
{
    mitilog_error error;
    mitilog_status status = pg->execute_script(c, "test", sql, &error);
    if (status != MITILOG_OK)
        fail_msg("%s: %s", sql, error.text);
}

static int setup(void **state)
{
    const char *server = getenv("MITILOG_TEST_POSTGRESQL");
    if (server == NULL || server[0] == '\0') {
        *state = NULL;
        return 0;
    }
    fixture *f = calloc(1, sizeof *f);
    snprintf(f->server, sizeof f->server, "%s", server);
    snprintf(f->name, sizeof f->name, "engine_test_%ld", (long)getpid());
    snprintf(f->database, sizeof f->database, "%s dbname=%s", server, f->name);
    store_connection *c = NULL;
    mitilog_error error;
    if (pg->open(server, 0, 5000, &c, &error) != MITILOG_OK) {
        fprintf(stderr, "%s\n", error.text);
        free(f);
        return -1;
    }
    char sql[256];
    snprintf(sql, sizeof sql, "DROP DATABASE IF EXISTS %s", f->name);
    run(c, sql);
    snprintf(sql, sizeof sql,
             "CREATE DATABASE %s TEMPLATE template0 ENCODING 'UTF8' LOCALE 'C.UTF-8'", f->name);
    run(c, sql);
    pg->close(c);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    if (f == NULL)
        return 0;
    store_connection *c = NULL;
    mitilog_error error;
    if (pg->open(f->server, 0, 5000, &c, &error) == MITILOG_OK) {
        char sql[256];
        snprintf(sql, sizeof sql, "DROP DATABASE IF EXISTS %s WITH (FORCE)", f->name);
        pg->execute_script(c, "drop", sql, &error);
        pg->close(c);
    }
    free(f);
    return 0;
}

static store_connection *connect_or_skip(void **state)
{
    fixture *f = *state;
    if (f == NULL) {
        fprintf(stderr, "skipped: MITILOG_TEST_POSTGRESQL is not set (a conninfo such as the one "
                        "tests/postgresql/cluster.sh start prints)\n");
        skip();
    }
    store_connection *c = NULL;
    mitilog_error error;
    if (pg->open(f->database, 0, 5000, &c, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    return c;
}

static long long query_integer(store_connection *c, const char *sql)
{
    store_statement *s = NULL;
    mitilog_error error;
    int has_row = 0;
    if (pg->prepare(c, "query", sql, &s, &error) != MITILOG_OK ||
        pg->step(s, &has_row, &error) != MITILOG_OK)
        fail_msg("%s: %s", sql, error.text);
    assert_true(has_row);
    long long value = pg->column_integer(s, 0);
    pg->finalize(s);
    return value;
}

typedef struct migration_thread {
    const char *conninfo;
    mitilog_status status;
    int version;
    mitilog_error error;
} migration_thread;

static void *migrate_thread(void *argument)
{
    migration_thread *t = argument;
    store_connection *c = NULL;
    t->status = pg->open(t->conninfo, 0, 5000, &c, &t->error);
    if (t->status == MITILOG_OK)
        t->status = store_postgresql_migrate(c, 5000, &t->version, &t->error);
    pg->close(c);
    return NULL;
}

/* Three receivers starting at once: each gets the newest schema, made once. */
static void three_receivers_migrate_once(void **state)
{
    store_connection *c = connect_or_skip(state);
    fixture *f = *state;
    migration_thread threads[3];
    pthread_t ids[3];
    for (int i = 0; i < 3; i++) {
        threads[i] = (migration_thread){.conninfo = f->database};
        assert_int_equal(pthread_create(&ids[i], NULL, migrate_thread, &threads[i]), 0);
    }
    for (int i = 0; i < 3; i++) {
        pthread_join(ids[i], NULL);
        if (threads[i].status != MITILOG_OK)
            fail_msg("receiver %d: %s", i, threads[i].error.text);
        assert_int_equal(threads[i].version, store_postgresql_latest_migration());
    }
    assert_int_equal(query_integer(c, "SELECT count(*) FROM schema_version"), 1);
    assert_int_equal(query_integer(c, "SELECT version FROM schema_version"),
                     store_postgresql_latest_migration());
    /* Partitions from this month on exist, and the default partition. */
    assert_true(query_integer(c, "SELECT count(*) FROM pg_inherits "
                                 "WHERE inhparent = 'instances'::regclass") >= 13);
    /* Once more: nothing to do, same version. */
    int version = 0;
    mitilog_error error;
    if (store_postgresql_migrate(c, 5000, &version, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    assert_int_equal(version, store_postgresql_latest_migration());
    pg->close(c);
}

static void columns_are_typed_as_sqlite_would(void **state)
{
    store_connection *c = connect_or_skip(state);
    store_statement *s = NULL;
    mitilog_error error;
    int has_row = 0;
    if (pg->prepare(c, "types",
                    "SELECT 7::int4, 2.5::float8, 'text', NULL, true, sum(x), sum(x) / 2.0, "
                    "'\\x00ff41'::bytea, :name::text, ?1::text "
                    "FROM (VALUES (3::bigint), (4::bigint)) AS v (x)",
                    &s, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    assert_int_equal(pg->parameter_index(s, ":name"), 1);
    if (pg->bind_text(s, 1, "named", 5, &error) != MITILOG_OK ||
        pg->step(s, &has_row, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    assert_true(has_row);
    assert_int_equal(pg->column_count(s), 10);
    assert_int_equal(pg->column_type(s, 0), STORE_VALUE_INTEGER);
    assert_int_equal(pg->column_integer(s, 0), 7);
    assert_int_equal(pg->column_type(s, 1), STORE_VALUE_REAL);
    assert_true(pg->column_real(s, 1) == 2.5);
    assert_int_equal(pg->column_type(s, 2), STORE_VALUE_TEXT);
    assert_string_equal(pg->column_text(s, 2), "text");
    assert_int_equal(pg->column_type(s, 3), STORE_VALUE_NULL);
    assert_null(pg->column_text(s, 3));
    assert_int_equal(pg->column_type(s, 4), STORE_VALUE_INTEGER);
    assert_int_equal(pg->column_integer(s, 4), 1);
    /* sum of bigints is numeric in PostgreSQL, an integer in SQLite. */
    assert_int_equal(pg->column_type(s, 5), STORE_VALUE_INTEGER);
    assert_int_equal(pg->column_integer(s, 5), 7);
    assert_int_equal(pg->column_type(s, 6), STORE_VALUE_REAL);
    assert_true(pg->column_real(s, 6) == 3.5);
    assert_int_equal(pg->column_type(s, 7), STORE_VALUE_BLOB);
    assert_int_equal(pg->column_bytes(s, 7), 3);
    assert_memory_equal(pg->column_blob(s, 7), "\x00\xff\x41", 3);
    assert_string_equal(pg->column_text(s, 8), "named");
    /* ?1 is :name, as in SQLite's numbering. */
    assert_string_equal(pg->column_text(s, 9), "named");
    assert_int_equal(pg->step(s, &has_row, &error), MITILOG_OK);
    assert_false(has_row);
    pg->finalize(s);
    pg->close(c);
}

/* Binds what the instance upsert needs of one object (its UID, the
 * statuses the schema requires) and runs it: *replaced_count and *id from
 * its row; returns 0, or -1 with error filled (no row is an error). */
static int upsert_instance_at(store_statement *s, const char *uid, const char *received_at,
                              long long *replaced_count, long long *id, mitilog_error *error);

static int upsert_instance(store_connection *c, store_statement *s, const char *uid,
                           long long *replaced_count, long long *id, mitilog_error *error)
{
    (void)c;
    return upsert_instance_at(s, uid, "", replaced_count, id, error);
}

/* The same, received at received_at ("" = now). */
static int upsert_instance_at(store_statement *s, const char *uid, const char *received_at,
                              long long *replaced_count, long long *id, mitilog_error *error)
{
    static const char *texts[][2] = {
        {":sop_class_uid", "1.2.840.10008.5.1.4.1.1.6.1"},
        {":acquired_at_source", "missing"},
        {":number_of_frames_status", "missing"},
        {":frame_time_ms_status", "missing"},
        {":mi_status", "missing"},
        {":tis_status", "missing"},
        {":tib_status", "missing"},
        {":tic_status", "missing"},
        {":tis_focus_status", "missing"},
        {":tis_surface_status", "missing"},
        {":object_kind", "image"},
        {":image_type_bitmap_status", "missing"},
        {":site", "north"}, /* the receiver's site (migration 013) */
    };
    int status =
        pg->bind_text(s, pg->parameter_index(s, ":sop_instance_uid"), uid, strlen(uid), error);
    if (status == MITILOG_OK)
        status = pg->bind_text(s, pg->parameter_index(s, ":received_at"), received_at,
                               strlen(received_at), error);
    for (size_t i = 0; status == MITILOG_OK && i < sizeof texts / sizeof texts[0]; i++) {
        int index = pg->parameter_index(s, texts[i][0]);
        assert_true(index > 0);
        status = pg->bind_text(s, index, texts[i][1], strlen(texts[i][1]), error);
    }
    static const char *zeros[] = {":is_ultrasound",    ":has_acoustic_record", ":modes",
                                  ":modes_image_type", ":modes_regions",       ":modes_sr",
                                  ":modes_conflict",   ":text_replaced"};
    for (size_t i = 0; status == MITILOG_OK && i < sizeof zeros / sizeof zeros[0]; i++)
        status = pg->bind_integer(s, pg->parameter_index(s, zeros[i]), 0, error);
    int has_row = 0;
    if (status == MITILOG_OK)
        status = pg->step(s, &has_row, error);
    if (status == MITILOG_OK && !has_row) {
        mitilog_error_set(error, MITILOG_ERROR_DATABASE, "the upsert gave no row");
        status = MITILOG_ERROR_DATABASE;
    }
    if (status == MITILOG_OK) {
        *replaced_count = pg->column_integer(s, 0);
        *id = pg->column_integer(s, 1);
    }
    pg->reset(s);
    return status == MITILOG_OK ? 0 : -1;
}

static const char upsert_name[] = "queries/instances/postgresql/instance_upsert.sql";

/* The instance upsert through instance_keys: a re-send keeps the id and
 * counts a replacement; one row in instances, one key. */
static void resending_replaces_never_duplicates(void **state)
{
    store_connection *c = connect_or_skip(state);
    int version = 0;
    mitilog_error error;
    if (store_postgresql_migrate(c, 5000, &version, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    const char *sql = sql_file_text(upsert_name);
    assert_non_null(sql);
    store_statement *s = NULL;
    if (pg->prepare(c, upsert_name, sql, &s, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    long long ids[2] = {0, 0};
    for (int round = 0; round < 2; round++) {
        long long replaced = -1;
        if (upsert_instance(c, s, "1.2.826.0.1.3680043.10.999.1", &replaced, &ids[round], &error) !=
            0)
            fail_msg("%s", error.text);
        assert_int_equal(replaced, round);
    }
    pg->finalize(s);
    assert_int_equal(ids[0], ids[1]);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instances"), 1);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instance_keys"), 1);
    /* The row sits in this month's partition, not the default one. */
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instances_default"), 0);
    pg->close(c);
}

/* Rows of a month without its partition wait in the default partition
 * (an object copied in from an older database); the next start makes the
 * month's partition and moves them there, the instance and its header
 * copy alike. */
static void older_months_move_out_of_the_default_partition(void **state)
{
    store_connection *c = connect_or_skip(state);
    int version = 0;
    mitilog_error error;
    if (store_postgresql_migrate(c, 5000, &version, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    store_statement *s = NULL;
    if (pg->prepare(c, upsert_name, sql_file_text(upsert_name), &s, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    long long replaced = -1, id = 0;
    if (upsert_instance_at(s, "1.2.826.0.1.3680043.10.999.3", "2025-03-10T08:00:00.000Z", &replaced,
                           &id, &error) != 0)
        fail_msg("%s", error.text);
    pg->finalize(s);
    char sql[200];
    snprintf(sql, sizeof sql,
             "INSERT INTO instance_headers (instance_id, first_received_at, bytes) "
             "VALUES (%lld, '2025-03-10T08:00:00.000Z', '\\x00')",
             id);
    run(c, sql);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instances_default"), 1);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instance_headers_default"), 1);
    if (store_postgresql_migrate(c, 5000, &version, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instances_default"), 0);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instance_headers_default"), 0);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instances_2025_03"), 1);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instance_headers_2025_03"), 1);
    snprintf(sql, sizeof sql, "SELECT count(*) FROM instances WHERE id = %lld", id);
    assert_int_equal(query_integer(c, sql), 1);
    /* The moved partition is a partition like the others: a re-send
     * finds its row there (one row, replaced once). */
    if (pg->prepare(c, upsert_name, sql_file_text(upsert_name), &s, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    long long again = 0;
    if (upsert_instance(c, s, "1.2.826.0.1.3680043.10.999.3", &replaced, &again, &error) != 0)
        fail_msg("%s", error.text);
    pg->finalize(s);
    assert_int_equal(replaced, 1);
    assert_int_equal(again, id);
    assert_int_equal(query_integer(c, "SELECT count(*) FROM instances WHERE sop_instance_uid = "
                                      "'1.2.826.0.1.3680043.10.999.3'"),
                     1);
    pg->close(c);
}

typedef struct upsert_thread {
    const char *conninfo;
    const char *uid;
    long long replaced_count, id;
    int result;
    mitilog_error error;
} upsert_thread;

static void *upsert_thread_run(void *argument)
{
    upsert_thread *t = argument;
    store_connection *c = NULL;
    store_statement *s = NULL;
    t->result = -1;
    if (pg->open(t->conninfo, 0, 60000, &c, &t->error) == MITILOG_OK &&
        pg->prepare(c, upsert_name, sql_file_text(upsert_name), &s, &t->error) == MITILOG_OK)
        t->result = upsert_instance(c, s, t->uid, &t->replaced_count, &t->id, &t->error);
    pg->finalize(s);
    pg->close(c);
    return NULL;
}

/* Two receivers get the same object at once: the second waits for the
 * first's transaction and then replaces its row (one row, the same id,
 * replaced_count 1), rather than failing or writing a second row. */
static void two_receivers_with_one_object_write_one_row(void **state)
{
    store_connection *c = connect_or_skip(state);
    fixture *f = *state;
    int version = 0;
    mitilog_error error;
    if (store_postgresql_migrate(c, 5000, &version, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    static const char uid[] = "1.2.826.0.1.3680043.10.999.2";
    store_statement *s = NULL;
    if (pg->prepare(c, upsert_name, sql_file_text(upsert_name), &s, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    run(c, "BEGIN");
    long long replaced = -1, id = 0;
    if (upsert_instance(c, s, uid, &replaced, &id, &error) != 0)
        fail_msg("%s", error.text);
    assert_int_equal(replaced, 0);
    /* The other receiver sends the same object while this transaction is
     * open: it waits on the key's row lock. */
    upsert_thread other = {.conninfo = f->database, .uid = uid};
    pthread_t thread;
    assert_int_equal(pthread_create(&thread, NULL, upsert_thread_run, &other), 0);
    /* Watched from a third session: pg_stat_activity is read once per
     * transaction, and this one's is open. */
    store_connection *watcher = NULL;
    assert_int_equal(pg->open(f->database, 1, 5000, &watcher, &error), MITILOG_OK);
    while (query_integer(watcher, "SELECT count(*) FROM pg_stat_activity WHERE datname = "
                                  "current_database() AND wait_event_type = 'Lock'") == 0)
        usleep(10000);
    pg->close(watcher);
    run(c, "COMMIT");
    pthread_join(thread, NULL);
    if (other.result != 0)
        fail_msg("the second receiver: %s", other.error.text);
    assert_int_equal(other.replaced_count, 1);
    assert_int_equal(other.id, id);
    char sql[160];
    snprintf(sql, sizeof sql, "SELECT count(*) FROM instances WHERE sop_instance_uid = '%s'", uid);
    assert_int_equal(query_integer(c, sql), 1);
    pg->finalize(s);
    pg->close(c);
}

/* The server ends the session: the open transaction fails as lost, its
 * COMMIT too; after ROLLBACK the next request connects again. */
static void a_lost_connection_commits_nothing_and_recovers(void **state)
{
    store_connection *c = connect_or_skip(state);
    fixture *f = *state;
    run(c, "CREATE TABLE IF NOT EXISTS lost_test (value bigint)");
    store_connection *other = NULL;
    mitilog_error error;
    assert_int_equal(pg->open(f->database, 0, 5000, &other, &error), MITILOG_OK);

    store_statement *begin = NULL, *insert = NULL, *commit = NULL, *rollback = NULL;
    assert_int_equal(pg->prepare(c, "begin", "BEGIN", &begin, &error), MITILOG_OK);
    assert_int_equal(pg->prepare(c, "insert", "INSERT INTO lost_test VALUES (?1)", &insert, &error),
                     MITILOG_OK);
    assert_int_equal(pg->prepare(c, "commit", "COMMIT", &commit, &error), MITILOG_OK);
    assert_int_equal(pg->prepare(c, "rollback", "ROLLBACK", &rollback, &error), MITILOG_OK);
    /* A session setting (the writer's durability) outlives the session. */
    run(c, "-- durability\nSET synchronous_commit = off;");
    long long pid = query_integer(c, "SELECT pg_backend_pid()");
    int has_row = 0;
    assert_int_equal(pg->step(begin, &has_row, &error), MITILOG_OK);
    pg->reset(begin);
    assert_int_equal(pg->bind_integer(insert, 1, 1, &error), MITILOG_OK);
    assert_int_equal(pg->step(insert, &has_row, &error), MITILOG_OK);
    pg->reset(insert);
    assert_int_equal(pg->in_transaction(c), 1);

    char sql[96];
    snprintf(sql, sizeof sql, "SELECT pg_terminate_backend(%lld)", pid);
    assert_int_equal(query_integer(other, sql), 1);

    assert_int_equal(pg->bind_integer(insert, 1, 2, &error), MITILOG_OK);
    assert_int_not_equal(pg->step(insert, &has_row, &error), MITILOG_OK);
    assert_int_equal(pg->connection_lost(c), 1);
    pg->reset(insert);
    assert_int_not_equal(pg->step(commit, &has_row, &error), MITILOG_OK);
    assert_int_equal(pg->connection_lost(c), 1);
    pg->reset(commit);
    /* The failed COMMIT ended the lost transaction: a read connects again
     * (a dashboard's connection after its snapshot was lost). */
    assert_int_equal(query_integer(c, "SELECT 5"), 5);
    assert_int_equal(pg->connection_lost(c), 0);
    assert_int_equal(pg->step(rollback, &has_row, &error), MITILOG_OK);
    pg->reset(rollback);

    /* Back: a new session, the statements prepared again. */
    if (pg->step(begin, &has_row, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    pg->reset(begin);
    assert_int_equal(pg->connection_lost(c), 0);
    assert_int_equal(pg->bind_integer(insert, 1, 3, &error), MITILOG_OK);
    if (pg->step(insert, &has_row, &error) != MITILOG_OK)
        fail_msg("%s", error.text);
    pg->reset(insert);
    assert_int_equal(pg->step(commit, &has_row, &error), MITILOG_OK);
    pg->reset(commit);
    assert_int_equal(query_integer(other, "SELECT count(*) FROM lost_test"), 1);
    assert_int_equal(query_integer(other, "SELECT min(value) FROM lost_test"), 3);
    assert_int_not_equal(query_integer(c, "SELECT pg_backend_pid()"), pid);
    assert_int_equal(
        query_integer(c, "SELECT (current_setting('synchronous_commit') = 'off')::int"), 1);
    /* changes(): rows of the last INSERT, UPDATE or DELETE; a SELECT
     * keeps it (sqlite.org/c3ref/changes.html). */
    run(other, "UPDATE lost_test SET value = value");
    assert_int_equal(pg->changes(other), 1);
    assert_int_equal(query_integer(other, "SELECT count(*) FROM lost_test"), 1);
    run(other, "INSERT INTO lost_test SELECT 5 UNION ALL SELECT 6");
    assert_int_equal(query_integer(other, "SELECT 42"), 42);
    assert_int_equal(pg->changes(other), 2);
    run(other, "DELETE FROM lost_test WHERE value > 4");

    /* A failed statement turns COMMIT into a rollback: reported. */
    store_statement *bad = NULL;
    assert_int_equal(pg->prepare(c, "bad", "SELECT 1 / (?1::bigint - ?1::bigint)", &bad, &error),
                     MITILOG_OK);
    assert_int_equal(pg->step(begin, &has_row, &error), MITILOG_OK);
    pg->reset(begin);
    assert_int_equal(pg->bind_integer(insert, 1, 4, &error), MITILOG_OK);
    assert_int_equal(pg->step(insert, &has_row, &error), MITILOG_OK);
    pg->reset(insert);
    assert_int_equal(pg->bind_integer(bad, 1, 1, &error), MITILOG_OK);
    assert_int_not_equal(pg->step(bad, &has_row, &error), MITILOG_OK);
    assert_int_equal(pg->connection_lost(c), 0);
    pg->reset(bad);
    assert_int_not_equal(pg->step(commit, &has_row, &error), MITILOG_OK);
    pg->reset(commit);
    assert_int_equal(query_integer(other, "SELECT count(*) FROM lost_test"), 1);

    pg->finalize(bad);
    pg->finalize(begin);
    pg->finalize(insert);
    pg->finalize(commit);
    pg->finalize(rollback);
    pg->close(other);
    pg->close(c);
}

/* A read connection (the dashboard's) refuses writes: its transactions
 * are read-only (PostgreSQL documentation, 20.11.1,
 * default_transaction_read_only). */
static void a_read_connection_does_not_write(void **state)
{
    store_connection *c = connect_or_skip(state);
    fixture *f = *state;
    run(c, "CREATE TABLE IF NOT EXISTS read_only_test (value bigint)");
    store_connection *reader = NULL;
    mitilog_error error;
    assert_int_equal(pg->open(f->database, 1, 5000, &reader, &error), MITILOG_OK);
    assert_int_not_equal(
        pg->execute_script(reader, "write", "INSERT INTO read_only_test VALUES (1)", &error),
        MITILOG_OK);
    assert_non_null(strstr(error.text, "read-only"));
    assert_int_equal(pg->connection_lost(reader), 0);
    assert_int_equal(query_integer(reader, "SELECT count(*) FROM read_only_test"), 0);
    pg->close(reader);
    pg->close(c);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(three_receivers_migrate_once),
        cmocka_unit_test(columns_are_typed_as_sqlite_would),
        cmocka_unit_test(resending_replaces_never_duplicates),
        cmocka_unit_test(two_receivers_with_one_object_write_one_row),
        cmocka_unit_test(older_months_move_out_of_the_default_partition),
        cmocka_unit_test(a_lost_connection_commits_nothing_and_recovers),
        cmocka_unit_test(a_read_connection_does_not_write),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
