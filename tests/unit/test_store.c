/* Unit tests of the store: schema migrations, writing with group commit
 * (replacement, concurrency, one bad record failing alone, read-only and
 * full databases) and the JSON queries. Each test uses a real database
 * file in a fresh temporary directory. JSON results are read back with
 * SQLite's own json_extract/json_type, never with a hand-made parser. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include <pthread.h>
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "store/sql_files.h"
#include "extract/ext_modes.h"
#include "store/store.h"
#include "store/store_internal.h"
#include "store/store_devices.h"
#include "store/store_findings.h"
#include "store/store_instances.h"
#include "store/store_reports.h"

typedef struct fixture {
    char directory[64];
    char path[128];
    store *store;
} fixture;

/* --- helpers ------------------------------------------------------------ */

/* Creates a temporary directory and opens a store in it. */
static int fixture_setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    assert_non_null(f);
    snprintf(f->directory, sizeof f->directory, "/tmp/mitilog-store-XXXXXX");
    assert_non_null(mkdtemp(f->directory));
    snprintf(f->path, sizeof f->path, "%s/mitilog.db", f->directory);
    mitilog_error error = {{0}};
    if (store_open(f->path, 5000, &f->store, &error) != MITILOG_OK)
        fail_msg("store_open: %s", error.text);
    *state = f;
    return 0;
}

/* Closes the store and removes the database files and the directory. */
static int fixture_teardown(void **state)
{
    fixture *f = *state;
    store_close(f->store);
    const char *suffixes[] = {"", "-wal", "-shm"};
    for (int i = 0; i < 3; i++) {
        char name[160];
        snprintf(name, sizeof name, "%s%s", f->path, suffixes[i]);
        unlink(name);
    }
    chmod(f->directory, 0700);
    rmdir(f->directory);
    free(f);
    return 0;
}

/* Duplicates text (NULL stays NULL). */
static char *dup_text(const char *text) { return text != NULL ? strdup(text) : NULL; }

static exam_number ok_number(double value)
{
    exam_number number = {EXAM_VALUE_OK, value};
    return number;
}

static const exam_number missing_number = {EXAM_VALUE_MISSING, 0.0};
static const exam_number invalid_number = {EXAM_VALUE_INVALID, 0.0};

/* A record built by hand: every index missing unless set afterwards. */
static void make_record(ext_record *record, const char *sop_instance_uid,
                        const char *study_instance_uid, const char *acquired_at,
                        const char *received_at)
{
    memset(record, 0, sizeof *record);
    record->sop_class_uid = dup_text("1.2.840.10008.5.1.4.1.1.6.1");
    record->sop_instance_uid = dup_text(sop_instance_uid);
    record->study_instance_uid = dup_text(study_instance_uid);
    record->series_instance_uid = dup_text("1.2.3.4");
    record->modality = dup_text("US");
    record->station_name = dup_text("US-ROOM-1");
    record->institutional_department_name = dup_text("Imaging");
    record->study_description = dup_text("OB 2nd trimester");
    record->protocol_name = dup_text("OB General");
    record->transfer_syntax_uid = dup_text("1.2.840.10008.1.2.1");
    record->calling_ae_title = dup_text("SCANNER1");
    snprintf(record->acquired_at, sizeof record->acquired_at, "%s",
             acquired_at != NULL ? acquired_at : "");
    record->acquired_at_source = acquired_at != NULL ? EXT_TIME_ACQUISITION : EXT_TIME_NONE;
    snprintf(record->received_at, sizeof record->received_at, "%s",
             received_at != NULL ? received_at : "");
    record->number_of_frames = missing_number;
    record->frame_time_ms = missing_number;
    record->is_ultrasound = 1;
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        record->indices[i] = missing_number;
}

/* Sets index i to an ok value with its raw text. */
static void set_index(ext_record *record, exam_index index, exam_number number, const char *raw)
{
    record->indices[index] = number;
    free(record->index_raw[index]);
    record->index_raw[index] = dup_text(raw);
}

/* Frees what make_record() and set_index() allocated. */
static void free_record(ext_record *record)
{
    char **texts[] = {&record->sop_class_uid,
                      &record->sop_instance_uid,
                      &record->study_instance_uid,
                      &record->series_instance_uid,
                      &record->modality,
                      &record->station_name,
                      &record->institutional_department_name,
                      &record->study_description,
                      &record->protocol_name,
                      &record->transfer_syntax_uid,
                      &record->calling_ae_title,
                      &record->source_path};
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++) {
        free(*texts[i]);
        *texts[i] = NULL;
    }
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        free(record->index_raw[i]);
        record->index_raw[i] = NULL;
    }
}

/* Evaluates "SELECT <function>(json, path)" in an in-memory SQLite and
 * returns the result as malloc'ed text ("(null)" for SQL NULL). */
static char *json_eval(const char *function, const char *json, const char *path)
{
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(":memory:", &db), SQLITE_OK);
    char sql[64];
    snprintf(sql, sizeof sql, "SELECT %s(?1, ?2)", function);
    sqlite3_stmt *statement = NULL;
    assert_int_equal(sqlite3_prepare_v2(db, sql, -1, &statement, NULL), SQLITE_OK);
    sqlite3_bind_text(statement, 1, json, -1, SQLITE_STATIC);
    sqlite3_bind_text(statement, 2, path, -1, SQLITE_STATIC);
    if (sqlite3_step(statement) != SQLITE_ROW)
        fail_msg("%s(%s): %s", function, path, sqlite3_errmsg(db));
    const unsigned char *text = sqlite3_column_text(statement, 0);
    char *result = strdup(text != NULL ? (const char *)text : "(null)");
    sqlite3_finalize(statement);
    sqlite3_close(db);
    return result;
}

/* Asserts that json_extract(json, path) is the text expected. */
static void assert_json(const char *json, const char *path, const char *expected)
{
    char *value = json_eval("json_extract", json, path);
    if (strcmp(value, expected) != 0)
        fail_msg("%s: got '%s', expected '%s' in %s", path, value, expected, json);
    free(value);
}

/* Asserts json_type(json, path): 'null', 'true', 'real', 'integer', ... */
static void assert_json_type(const char *json, const char *path, const char *expected)
{
    char *type = json_eval("json_type", json, path);
    if (strcmp(type, expected) != 0)
        fail_msg("%s: type '%s', expected '%s'", path, type, expected);
    free(type);
}

/* Asserts that json is an array of length elements. */
static void assert_json_length(const char *json, int length)
{
    char *value = json_eval("json_array_length", json, "$");
    char expected[16];
    snprintf(expected, sizeof expected, "%d", length);
    if (strcmp(value, expected) != 0)
        fail_msg("array length %s, expected %d: %s", value, length, json);
    free(value);
}

/* Runs one integer-valued SQL query on the database file with a separate
 * connection, as the sqlite3 CLI would. */
static long long query_int(const char *path, const char *sql)
{
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open_v2(path, &db, SQLITE_OPEN_READONLY, NULL), SQLITE_OK);
    sqlite3_stmt *statement = NULL;
    if (sqlite3_prepare_v2(db, sql, -1, &statement, NULL) != SQLITE_OK)
        fail_msg("%s: %s", sql, sqlite3_errmsg(db));
    assert_int_equal(sqlite3_step(statement), SQLITE_ROW);
    long long value = sqlite3_column_int64(statement, 0);
    sqlite3_finalize(statement);
    sqlite3_close(db);
    return value;
}

static char *instances_of_study(store *st, const char *study)
{
    store_instance_filter filter = {study, NULL, 0};
    char *json = NULL;
    mitilog_error error = {{0}};
    if (store_instances_json(st, &filter, &json, &error) != MITILOG_OK)
        fail_msg("store_instances_json: %s", error.text);
    return json;
}

/* The number of the newest built-in migration (migrations/NNN_*.sql). */
static int newest_migration(void)
{
    int newest = 0;
    for (const sql_file *file = sql_files; file->name != NULL; file++) {
        if (strncmp(file->name, "migrations/", 11) == 0 && atoi(file->name + 11) > newest)
            newest = atoi(file->name + 11);
    }
    return newest;
}

/* --- tests -------------------------------------------------------------- */
/* PRAGMA synchronous of the writer: SQLite documents FULL = 2, NORMAL = 1
 * (sqlite.org/pragma.html#pragma_synchronous). */
static int writer_synchronous(store *st)
{
    sqlite3_stmt *statement = NULL;
    int value = -1;
    if (sqlite3_prepare_v2(store_writer_connection(st), "PRAGMA synchronous", -1, &statement,
                           NULL) == SQLITE_OK &&
        sqlite3_step(statement) == SQLITE_ROW)
        value = sqlite3_column_int(statement, 0);
    sqlite3_finalize(statement);
    return value;
}

static void durability_setting(void **state)
{
    fixture *f = *state;
    mitilog_error error;
    assert_int_equal(writer_synchronous(f->store), 2); /* the default: FULL */
    assert_int_equal(store_set_durability(f->store, STORE_DURABILITY_PROCESS, &error), MITILOG_OK);
    assert_int_equal(writer_synchronous(f->store), 1); /* NORMAL */
    assert_int_equal(store_set_durability(f->store, STORE_DURABILITY_POWER_LOSS, &error),
                     MITILOG_OK);
    assert_int_equal(writer_synchronous(f->store), 2);
}

static void open_creates_schema(void **state)
{
    fixture *f = *state;
    assert_true(newest_migration() >= 12); /* sql/migrations/001..008, 011, 012 */
    assert_int_equal(store_schema_version(f->store), newest_migration());
    assert_int_equal(query_int(f->path, "PRAGMA user_version"), newest_migration());
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM sqlite_schema "
                                        "WHERE name IN ('instances', "
                                        "'rejections')"),
                     2);
    /* Journal mode is persistent in the file: WAL. */
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(f->path, &db), SQLITE_OK);
    sqlite3_stmt *statement = NULL;
    sqlite3_prepare_v2(db, "PRAGMA journal_mode", -1, &statement, NULL);
    assert_int_equal(sqlite3_step(statement), SQLITE_ROW);
    assert_string_equal((const char *)sqlite3_column_text(statement, 0), "wal");
    sqlite3_finalize(statement);
    sqlite3_close(db);
}

static void put_and_read_back(void **state)
{
    fixture *f = *state;
    ext_record record;
    make_record(&record, "1.2.3.4.5.1", "1.2.3.4.5", "2024-03-01T10:15:00",
                "2024-03-01T09:15:02.123Z");
    set_index(&record, EXAM_INDEX_MI, ok_number(0.8), "0.8");
    set_index(&record, EXAM_INDEX_TIS, ok_number(1.25), " 1.25 ");
    set_index(&record, EXAM_INDEX_TIB, missing_number, NULL);
    set_index(&record, EXAM_INDEX_TIC, invalid_number, "1,2");
    set_index(&record, EXAM_INDEX_TIS_FOCUS, ok_number(0.3), "3E-1");
    set_index(&record, EXAM_INDEX_TIS_SURFACE, missing_number, "");
    record.number_of_frames = ok_number(12);
    record.frame_time_ms = ok_number(33.5);

    store_put_outcome outcome = STORE_PUT_REPLACED;
    mitilog_error error = {{0}};
    if (store_put_instance(f->store, &record, NULL, &outcome, &error) != MITILOG_OK)
        fail_msg("put: %s", error.text);
    assert_int_equal(outcome, STORE_PUT_INSERTED);

    char *json = instances_of_study(f->store, "1.2.3.4.5");
    assert_json_length(json, 1);
    assert_json(json, "$[0].sop_instance_uid", "1.2.3.4.5.1");
    assert_json(json, "$[0].study_instance_uid", "1.2.3.4.5");
    assert_json(json, "$[0].sop_class_uid", "1.2.840.10008.5.1.4.1.1.6.1");
    assert_json(json, "$[0].modality", "US");
    assert_json(json, "$[0].station_name", "US-ROOM-1");
    assert_json(json, "$[0].acquired_at", "2024-03-01T10:15:00");
    assert_json(json, "$[0].acquired_at_source", "acquisition");
    assert_json(json, "$[0].received_at", "2024-03-01T09:15:02.123Z");
    assert_json(json, "$[0].number_of_frames", "12");
    assert_json_type(json, "$[0].number_of_frames", "integer");
    assert_json(json, "$[0].frame_time_ms", "33.5");
    assert_json_type(json, "$[0].is_ultrasound", "true");
    assert_json(json, "$[0].mi", "0.8");
    assert_json(json, "$[0].tis", "1.25");
    assert_json_type(json, "$[0].tib", "null");
    assert_json_type(json, "$[0].tic", "null");
    assert_json(json, "$[0].tis_focus", "0.3");
    assert_json_type(json, "$[0].tis_surface", "null");
    assert_json(json, "$[0].index_status.mi", "ok");
    assert_json(json, "$[0].index_status.tib", "missing");
    assert_json(json, "$[0].index_status.tic", "invalid");
    assert_json(json, "$[0].index_raw.tis", " 1.25 ");
    assert_json(json, "$[0].index_raw.tic", "1,2");
    assert_json(json, "$[0].index_raw.tis_focus", "3E-1");
    assert_json_type(json, "$[0].index_raw.tib", "null");
    assert_json(json, "$[0].index_raw.tis_surface", "");
    assert_json(json, "$[0].replaced_count", "0");
    free(json);

    /* The same instance through the since filter; a later since: none. */
    store_instance_filter since = {NULL, "2024-03-01", 0};
    assert_int_equal(store_instances_json(f->store, &since, &json, &error), MITILOG_OK);
    assert_json(json, "$[0].sop_instance_uid", "1.2.3.4.5.1");
    free(json);
    since.since = "2024-03-02";
    assert_int_equal(store_instances_json(f->store, &since, &json, &error), MITILOG_OK);
    assert_string_equal(json, "[]");
    free(json);
    free_record(&record);
}

/* The header copy is committed with its row and read back byte for byte;
 * a re-send replaces it, a re-send without one removes it (the rows'
 * reference: the bytes put, compared with memcmp). */
static void header_copy_follows_its_row(void **state)
{
    fixture *f = *state;
    ext_record record;
    make_record(&record, "1.2.3.8.1", "1.2.3.8", "2024-03-01T10:00:00", "2024-03-01T10:00:05.000Z");
    const unsigned char first[] = {'D', 'I', 'C', 'M', 0, 1, 2, 0xFF};
    const unsigned char second[] = {'D', 'I', 'C', 'M', 9, 9};
    mitilog_error error = {{0}};
    unsigned char *bytes = NULL;
    size_t size = 0;
    assert_int_equal(
        store_put_instance(f->store, &record, &(store_bytes){first, sizeof first}, NULL, &error),
        MITILOG_OK);
    assert_int_equal(store_get_header(f->store, "1.2.3.8.1", &bytes, &size, &error), MITILOG_OK);
    assert_int_equal(size, sizeof first);
    assert_memory_equal(bytes, first, sizeof first);
    free(bytes);

    assert_int_equal(
        store_put_instance(f->store, &record, &(store_bytes){second, sizeof second}, NULL, &error),
        MITILOG_OK);
    assert_int_equal(store_get_header(f->store, "1.2.3.8.1", &bytes, &size, &error), MITILOG_OK);
    assert_int_equal(size, sizeof second);
    assert_memory_equal(bytes, second, sizeof second);
    free(bytes);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instance_headers"), 1);

    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error), MITILOG_OK);
    assert_int_equal(store_get_header(f->store, "1.2.3.8.1", &bytes, &size, &error), MITILOG_OK);
    assert_null(bytes);
    assert_int_equal(store_get_header(f->store, "1.2.3.404", &bytes, &size, &error), MITILOG_OK);
    assert_null(bytes);
    /* An empty copy is refused before anything is written. */
    assert_int_equal(store_put_instance(f->store, &record, &(store_bytes){first, 0}, NULL, &error),
                     MITILOG_ERROR_INVALID);
    free_record(&record);
}

/* The schema's mode_names (migration 004) name each bit as the
 * extraction does (exam_mode_name): the modes columns and the
 * instance_modes view read back what was written. */
static void mode_names_match_extraction(void **state)
{
    fixture *f = *state;
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM mode_names"), EXAM_MODE_COUNT);
    for (int m = 0; m < EXAM_MODE_COUNT; m++) {
        char sql[160];
        snprintf(sql, sizeof sql, "SELECT count(*) FROM mode_names WHERE rank = %d AND mode = '%s'",
                 m, exam_mode_name((exam_mode)m));
        assert_int_equal(query_int(f->path, sql), 1);
    }
    ext_record record;
    make_record(&record, "1.2.3.7.1", "1.2.3.7", "2024-03-01T10:00:00", "2024-03-01T10:00:05.000Z");
    record.modes_image_type = EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_PW);
    record.modes_regions = EXAM_MODE_BIT(EXAM_MODE_2D);
    record.modes_sr = EXAM_MODE_BIT(EXAM_MODE_POWER);
    record.modes = record.modes_image_type | record.modes_regions | record.modes_sr;
    mitilog_error error = {{0}};
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error), MITILOG_OK);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instance_modes"), 4);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instance_modes WHERE "
                                        "source = 'image_type' AND mode IN ('2d', 'pw')"),
                     2);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instance_modes WHERE "
                                        "source = 'sr_container' AND mode = 'power' "
                                        "AND rank = 7"),
                     1);
    free_record(&record);
}

/* A database made by the three earlier migrations, with the modes of an
 * instance as rows of the old instance_modes table, is brought to
 * version 4 by store_open: the rows become the modes columns and read
 * back the same through the view (reference: the rows inserted here). */
static void migration_4_keeps_modes(void **state)
{
    fixture *f = *state;
    store_close(f->store);
    f->store = NULL;
    char path[160];
    snprintf(path, sizeof path, "%s/old.db", f->directory);
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(path, &db), SQLITE_OK);
    const char *migrations[] = {"migrations/001_instances.sql", "migrations/002_exam_context.sql",
                                "migrations/003_findings.sql"};
    for (int i = 0; i < 3; i++)
        assert_int_equal(sqlite3_exec(db, sql_file_text(migrations[i]), NULL, NULL, NULL),
                         SQLITE_OK);
    const char *rows =
        "INSERT INTO instances (id, sop_instance_uid, sop_class_uid, acquired_at_source,"
        " received_at, first_received_at, number_of_frames_status, frame_time_ms_status,"
        " is_ultrasound, mi_status, tis_status, tib_status, tic_status, tis_focus_status,"
        " tis_surface_status, modes) VALUES (7, '1.2.3.6.1', '1.2.840.10008.5.1.4.1.1.6.1',"
        " 'none', '2024-03-01T10:00:00Z', '2024-03-01T10:00:00Z', 'missing', 'missing', 1,"
        " 'missing', 'missing', 'missing', 'missing', 'missing', 'missing', 9);"
        "INSERT INTO instance_modes VALUES (7, '2d', 0, 'image_type'), (7, 'pw', 3, 'image_type'),"
        " (7, '2d', 0, 'region_data_type');"
        "INSERT INTO sr_values (instance_id, study_instance_uid, quantity, value, concept,"
        " item_position) VALUES (7, '1.2.3.6', 'tib', 1.5, 'DCM:1', '1.2');"
        "INSERT INTO exams (study_instance_uid, exam_type_source, governing_index,"
        " governing_index_source, instance_count, capture_count, cine_count, sr_count,"
        " other_count, estimated_seconds, unscaled_seconds, scale, span_seconds, timed_count,"
        " untimed_count, capped_count, gap_cap_seconds, updated_at) VALUES ('1.2.3.6', 'none',"
        " 'tib', 'default', 1, 1, 0, 0, 0, 60, 60, 1, 0, 1, 0, 0, 300, 'now');"
        "INSERT INTO exam_timeline VALUES ('1.2.3.6', 0, '1.2.3.6.1', 0, 60, 0, 60, 1);"
        "INSERT INTO exam_context (study_instance_uid, room, closed) VALUES ('1.2.3.6', 'R1', 1);"
        "INSERT INTO policies (version, normalised_text, first_loaded_at) VALUES ('v', '', 'now');"
        "INSERT INTO findings (study_instance_uid, rule_id, severity, policy_version,"
        " evaluated_at, superseded) VALUES ('1.2.3.6', 'ti_ceiling', 'warning', 'v', 'now', 1);";
    assert_int_equal(sqlite3_exec(db, rows, NULL, NULL, NULL), SQLITE_OK);
    sqlite3_close(db);
    mitilog_error error = {{0}};
    store *st = NULL;
    if (store_open(path, 5000, &st, &error) != MITILOG_OK)
        fail_msg("store_open: %s", error.text);
    assert_int_equal(store_schema_version(st), newest_migration());
    store_close(st);
    assert_int_equal(query_int(path, "SELECT modes_image_type FROM instances WHERE id = 7"), 9);
    assert_int_equal(query_int(path, "SELECT modes_regions FROM instances WHERE id = 7"), 1);
    assert_int_equal(query_int(path, "SELECT modes_sr FROM instances WHERE id = 7"), 0);
    assert_int_equal(query_int(path, "SELECT count(*) FROM instance_modes WHERE instance_id = 7"),
                     3);
    /* The rebuilt tables keep their rows, and their checks still refuse
     * what they refused (an unknown severity). */
    assert_int_equal(query_int(path, "SELECT count(*) FROM sr_values WHERE instance_id = 7 "
                                     "AND quantity = 'tib' AND value = 1.5"),
                     1);
    assert_int_equal(query_int(path, "SELECT capped FROM exam_timeline"), 1);
    assert_int_equal(query_int(path, "SELECT closed FROM exam_context WHERE room = 'R1'"), 1);
    assert_int_equal(query_int(path, "SELECT superseded FROM findings WHERE severity = 'warning'"),
                     1);
    assert_int_equal(query_int(path, "SELECT count(*) FROM exams WHERE governing_index = 'tib'"),
                     1);
    sqlite3 *check = NULL;
    assert_int_equal(sqlite3_open(path, &check), SQLITE_OK);
    assert_int_not_equal(sqlite3_exec(check,
                                      "INSERT INTO findings (rule_id, severity, "
                                      "policy_version, evaluated_at) VALUES "
                                      "('x', 'severe', 'v', 'now')",
                                      NULL, NULL, NULL),
                         SQLITE_OK);
    assert_int_not_equal(
        sqlite3_exec(check, "UPDATE instances SET mi_status = 'fine'", NULL, NULL, NULL),
        SQLITE_OK);
    sqlite3_close(check);
    const char *suffixes[] = {"", "-wal", "-shm"};
    for (int i = 0; i < 3; i++) {
        char name[200];
        snprintf(name, sizeof name, "%s%s", path, suffixes[i]);
        unlink(name);
    }
    if (store_open(f->path, 5000, &f->store, &error) != MITILOG_OK)
        fail_msg("store_open: %s", error.text);
}

static void resend_replaces(void **state)
{
    fixture *f = *state;
    ext_record record;
    make_record(&record, "1.2.3.9.1", "1.2.3.9", "2024-03-01T10:00:00", "2024-03-01T10:00:05.000Z");
    set_index(&record, EXAM_INDEX_MI, ok_number(1.0), "1.0");
    store_put_outcome outcome;
    mitilog_error error = {{0}};
    assert_int_equal(store_put_instance(f->store, &record, NULL, &outcome, &error), MITILOG_OK);
    assert_int_equal(outcome, STORE_PUT_INSERTED);

    set_index(&record, EXAM_INDEX_MI, ok_number(1.2), "1.2");
    snprintf(record.received_at, sizeof record.received_at, "2024-03-01T11:00:00.000Z");
    assert_int_equal(store_put_instance(f->store, &record, NULL, &outcome, &error), MITILOG_OK);
    assert_int_equal(outcome, STORE_PUT_REPLACED);

    char *json = instances_of_study(f->store, "1.2.3.9");
    assert_json_length(json, 1);
    assert_json(json, "$[0].mi", "1.2");
    assert_json(json, "$[0].replaced_count", "1");
    assert_json(json, "$[0].received_at", "2024-03-01T11:00:00.000Z");
    free(json);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instances "
                                        "WHERE first_received_at = "
                                        "'2024-03-01T10:00:05.000Z'"),
                     1);
    free_record(&record);
}

enum { THREADS = 8, PUTS_PER_THREAD = 200, UID_STRIDE = 100 };

typedef struct worker {
    store *store;
    int thread;
    int inserted;
    int replaced;
    int failed;
} worker;

/* Thread t puts UIDs t*100 .. t*100+199: neighbours overlap by 100. */
static void *put_worker(void *argument)
{
    worker *w = argument;
    for (int i = 0; i < PUTS_PER_THREAD; i++) {
        char uid[64];
        snprintf(uid, sizeof uid, "1.2.826.0.1.%d", w->thread * UID_STRIDE + i);
        ext_record record;
        make_record(&record, uid, "1.2.826.0.1", "2024-03-01T10:00:00", NULL);
        set_index(&record, EXAM_INDEX_MI, ok_number(0.01 * i), "x");
        store_put_outcome outcome;
        mitilog_error error;
        if (store_put_instance(w->store, &record, NULL, &outcome, &error) != MITILOG_OK)
            w->failed++;
        else if (outcome == STORE_PUT_INSERTED)
            w->inserted++;
        else
            w->replaced++;
        free_record(&record);
    }
    return NULL;
}

static void concurrent_puts(void **state)
{
    fixture *f = *state;
    pthread_t threads[THREADS];
    worker workers[THREADS];
    for (int t = 0; t < THREADS; t++) {
        workers[t] = (worker){f->store, t, 0, 0, 0};
        assert_int_equal(pthread_create(&threads[t], NULL, put_worker, &workers[t]), 0);
    }
    int inserted = 0, replaced = 0, failed = 0;
    for (int t = 0; t < THREADS; t++) {
        pthread_join(threads[t], NULL);
        inserted += workers[t].inserted;
        replaced += workers[t].replaced;
        failed += workers[t].failed;
    }
    /* Distinct UIDs: 0 .. 7*100+199 = 900; 1600 puts, so 700 replaced. */
    assert_int_equal(failed, 0);
    assert_int_equal(inserted, 900);
    assert_int_equal(replaced, 700);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instances"), 900);
    assert_int_equal(query_int(f->path, "SELECT sum(replaced_count) FROM instances"), 700);
}

static void reopen_keeps_schema_and_rows(void **state)
{
    fixture *f = *state;
    ext_record record;
    make_record(&record, "1.2.3.7.1", "1.2.3.7", NULL, NULL);
    mitilog_error error = {{0}};
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error), MITILOG_OK);
    store_close(f->store);
    f->store = NULL;
    /* After close the WAL was checkpointed and truncated into the file. */
    char wal[160];
    struct stat info;
    snprintf(wal, sizeof wal, "%s-wal", f->path);
    assert_true(stat(wal, &info) != 0 || info.st_size == 0);

    /* Reopen: migration 001 would fail on CREATE TABLE if re-applied. */
    if (store_open(f->path, 5000, &f->store, &error) != MITILOG_OK)
        fail_msg("reopen: %s", error.text);
    assert_int_equal(store_schema_version(f->store), newest_migration());
    char *json = instances_of_study(f->store, "1.2.3.7");
    assert_json(json, "$[0].sop_instance_uid", "1.2.3.7.1");
    assert_json_type(json, "$[0].acquired_at", "null");
    assert_json(json, "$[0].acquired_at_source", "none");
    free(json);
    /* An empty received_at is filled with the UTC time of the write. */
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instances "
                                        "WHERE received_at GLOB "
                                        "'2[0-9][0-9][0-9]-*T*Z'"),
                     1);
    free_record(&record);
}

static void read_only_database_fails_cleanly(void **state)
{
    fixture *f = *state;
    ext_record record;
    make_record(&record, "1.2.3.8.1", "1.2.3.8", NULL, NULL);
    mitilog_error error = {{0}};
    /* The process runs as root in CI, where file modes do not stop writes;
     * query_only makes the writer connection refuse every write with
     * SQLITE_READONLY, as a read-only file would. */
    sqlite3 *writer = store_writer_connection(f->store);
    assert_int_equal(sqlite3_exec(writer, "PRAGMA query_only = ON", NULL, NULL, NULL), SQLITE_OK);
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error),
                     MITILOG_ERROR_DATABASE);
    assert_non_null(strstr(error.text, "readonly"));
    store_rejection rejection = {"", "", "", "", "", "", "", "test"};
    assert_int_equal(store_put_rejection(f->store, &rejection, &error), MITILOG_ERROR_DATABASE);
    /* Writable again: the connection recovers. */
    assert_int_equal(sqlite3_exec(writer, "PRAGMA query_only = OFF", NULL, NULL, NULL), SQLITE_OK);
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error), MITILOG_OK);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instances"), 1);

    /* A real read-only file, where file modes apply (not as root). */
    if (geteuid() != 0) {
        chmod(f->path, 0444);
        chmod(f->directory, 0555);
        store *read_only = NULL;
        mitilog_status status = store_open(f->path, 100, &read_only, &error);
        if (status == MITILOG_OK) {
            assert_int_equal(store_put_instance(read_only, &record, NULL, NULL, &error),
                             MITILOG_ERROR_DATABASE);
            store_close(read_only);
        } else {
            assert_int_equal(status, MITILOG_ERROR_DATABASE);
        }
        chmod(f->directory, 0700);
        chmod(f->path, 0644);
    }
    free_record(&record);
}

static void full_database_fails_and_recovers(void **state)
{
    fixture *f = *state;
    sqlite3 *writer = store_writer_connection(f->store);
    /* Cap the file at its current size: the next new page is SQLITE_FULL,
     * as on a full disk. */
    assert_int_equal(sqlite3_exec(writer, "PRAGMA max_page_count = 1", NULL, NULL, NULL),
                     SQLITE_OK);
    char long_text[4000];
    memset(long_text, 'a', sizeof long_text - 1);
    long_text[sizeof long_text - 1] = '\0';
    ext_record record;
    make_record(&record, "1.2.3.6.1", "1.2.3.6", NULL, NULL);
    free(record.study_description);
    record.study_description = strdup(long_text);
    mitilog_error error = {{0}};
    int failures = 0;
    for (int i = 0; i < 20 && failures == 0; i++) {
        char uid[32];
        snprintf(uid, sizeof uid, "1.2.3.6.%d", i + 1);
        free(record.sop_instance_uid);
        record.sop_instance_uid = strdup(uid);
        mitilog_status status = store_put_instance(f->store, &record, NULL, NULL, &error);
        if (status != MITILOG_OK) {
            assert_int_equal(status, MITILOG_ERROR_DATABASE);
            assert_non_null(strstr(error.text, "full"));
            failures++;
            /* Nothing of the failed record is kept. */
            char sql[96];
            snprintf(sql, sizeof sql,
                     "SELECT count(*) FROM instances "
                     "WHERE sop_instance_uid = '%s'",
                     uid);
            assert_int_equal(query_int(f->path, sql), 0);
        }
    }
    assert_int_equal(failures, 1);
    /* Space again: the same record goes in. */
    assert_int_equal(sqlite3_exec(writer, "PRAGMA max_page_count = 1000000", NULL, NULL, NULL),
                     SQLITE_OK);
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error), MITILOG_OK);
    free_record(&record);
}

typedef struct batch_put {
    store *store;
    const char *uid;
    mitilog_status status;
    mitilog_error error;
} batch_put;

static void *batch_put_worker(void *argument)
{
    batch_put *put = argument;
    ext_record record;
    make_record(&record, put->uid, "1.2.3.5", NULL, NULL);
    put->status = store_put_instance(put->store, &record, NULL, NULL, &put->error);
    free_record(&record);
    return NULL;
}

static void bad_record_fails_alone(void **state)
{
    fixture *f = *state;
    /* A trigger on the writer refuses one UID inside the write. */
    sqlite3 *writer = store_writer_connection(f->store);
    assert_int_equal(sqlite3_exec(writer,
                                  "CREATE TEMP TRIGGER refuse BEFORE INSERT ON "
                                  "main.instances WHEN NEW.sop_instance_uid = '1.2.3.5.66' "
                                  "BEGIN SELECT RAISE(ABORT, 'refused by test'); END",
                                  NULL, NULL, NULL),
                     SQLITE_OK);
    /* Hold the write lock from another connection, so that the first
     * leader waits in BEGIN IMMEDIATE while the others queue up behind it
     * and then share one batch. */
    sqlite3 *blocker = NULL;
    assert_int_equal(sqlite3_open(f->path, &blocker), SQLITE_OK);
    assert_int_equal(sqlite3_exec(blocker, "BEGIN IMMEDIATE", NULL, NULL, NULL), SQLITE_OK);
    const char *uids[] = {"1.2.3.5.1", "1.2.3.5.2", "1.2.3.5.66", "1.2.3.5.3"};
    batch_put puts[4];
    pthread_t threads[4];
    for (int i = 0; i < 4; i++) {
        puts[i] = (batch_put){f->store, uids[i], MITILOG_OK, {{0}}};
        assert_int_equal(pthread_create(&threads[i], NULL, batch_put_worker, &puts[i]), 0);
        usleep(50000);
    }
    usleep(200000);
    assert_int_equal(sqlite3_exec(blocker, "COMMIT", NULL, NULL, NULL), SQLITE_OK);
    sqlite3_close(blocker);
    for (int i = 0; i < 4; i++)
        pthread_join(threads[i], NULL);
    assert_int_equal(puts[0].status, MITILOG_OK);
    assert_int_equal(puts[1].status, MITILOG_OK);
    assert_int_equal(puts[2].status, MITILOG_ERROR_DATABASE);
    assert_non_null(strstr(puts[2].error.text, "refused by test"));
    assert_int_equal(puts[3].status, MITILOG_OK);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instances"), 3);
}

static void bad_input_is_refused(void **state)
{
    fixture *f = *state;
    mitilog_error error = {{0}};
    store *none = NULL;
    assert_int_equal(store_open(NULL, 0, &none, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(store_open("/nonexistent-dir/x/y.db", 0, &none, &error),
                     MITILOG_ERROR_DATABASE);
    assert_null(none);
    assert_int_equal(store_put_instance(f->store, NULL, NULL, NULL, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(store_put_instance(NULL, NULL, NULL, NULL, NULL), MITILOG_ERROR_INVALID);

    ext_record record;
    make_record(&record, "", "1.2", NULL, NULL);
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error),
                     MITILOG_ERROR_INVALID);
    free_record(&record);

    make_record(&record, "1.2.1", "1.2", NULL, NULL);
    record.indices[EXAM_INDEX_MI].status = (exam_value_status)42;
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error),
                     MITILOG_ERROR_INVALID);
    record.indices[EXAM_INDEX_MI] = ok_number(0.0 / 0.0); /* NaN */
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error),
                     MITILOG_ERROR_INVALID);
    record.indices[EXAM_INDEX_MI] = missing_number;
    free(record.station_name);
    record.station_name = strdup("Salle \xe9"); /* Latin-1, not UTF-8 */
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error),
                     MITILOG_ERROR_INVALID);
    memset(record.acquired_at, 'x', sizeof record.acquired_at); /* no NUL */
    assert_int_equal(store_put_instance(f->store, &record, NULL, NULL, &error),
                     MITILOG_ERROR_INVALID);
    free_record(&record);
    store_rejection no_reason = {0};
    assert_int_equal(store_put_rejection(f->store, &no_reason, &error), MITILOG_ERROR_INVALID);
    char *json = NULL;
    assert_int_equal(store_instances_json(NULL, NULL, &json, &error), MITILOG_ERROR_INVALID);
    store_close(NULL);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM instances"), 0);
}

/* Puts one instance of study with the given time and indices (NAN: the
 * index is missing). */
static void put_study_instance(store *st, const char *uid, const char *study, const char *station,
                               const char *acquired_at, const char *received_at, double mi,
                               double tis)
{
    ext_record record;
    make_record(&record, uid, study, acquired_at, received_at);
    free(record.station_name);
    record.station_name = strdup(station);
    if (mi == mi)
        set_index(&record, EXAM_INDEX_MI, ok_number(mi), "mi");
    else
        set_index(&record, EXAM_INDEX_MI, invalid_number, "bad");
    if (tis == tis)
        set_index(&record, EXAM_INDEX_TIS, ok_number(tis), "tis");
    mitilog_error error = {{0}};
    if (store_put_instance(st, &record, NULL, NULL, &error) != MITILOG_OK)
        fail_msg("put %s: %s", uid, error.text);
    free_record(&record);
}

static void studies_aggregate(void **state)
{
    fixture *f = *state;
    const double none = 0.0 / 0.0;
    /* Study A, 2024-03-01, three instances sent out of order:
     *   10:05 ROOM-2  MI 1.1  TIS -      (TIS missing)
     *   10:00 ROOM-1  MI 0.8  TIS 0.4    <- first instance: station ROOM-1
     *   10:20 ROOM-2  MI bad  TIS 0.9    (MI invalid: not counted)
     * so max_mi = max(0.8, 1.1) = 1.1, max_tis = max(0.4, 0.9) = 0.9,
     * max_tib = null (never ok), instance_count 3,
     * first 10:00, last 10:20.
     * Study B, no acquisition time, received 2024-03-02: MI 0.5. */
    put_study_instance(f->store, "9.1.2", "9.1", "ROOM-2", "2024-03-01T10:05:00",
                       "2024-03-01T09:06:00.000Z", 1.1, none);
    put_study_instance(f->store, "9.1.1", "9.1", "ROOM-1", "2024-03-01T10:00:00",
                       "2024-03-01T09:01:00.000Z", 0.8, 0.4);
    put_study_instance(f->store, "9.1.3", "9.1", "ROOM-2", "2024-03-01T10:20:00",
                       "2024-03-01T09:21:00.000Z", none, 0.9);
    put_study_instance(f->store, "9.2.1", "9.2", "ROOM-3", NULL, "2024-03-02T08:00:00.000Z", 0.5,
                       none);

    char *json = NULL;
    mitilog_error error = {{0}};
    assert_int_equal(store_studies_json(f->store, NULL, NULL, &json, &error), MITILOG_OK);
    assert_json_length(json, 2);
    assert_json(json, "$[0].study_instance_uid", "9.1");
    assert_json(json, "$[0].station_name", "ROOM-1");
    assert_json(json, "$[0].instance_count", "3");
    assert_json(json, "$[0].first_acquired_at", "2024-03-01T10:00:00");
    assert_json(json, "$[0].last_acquired_at", "2024-03-01T10:20:00");
    assert_json(json, "$[0].max_mi", "1.1");
    assert_json(json, "$[0].max_tis", "0.9");
    assert_json_type(json, "$[0].max_tib", "null");
    assert_json(json, "$[1].study_instance_uid", "9.2");
    assert_json_type(json, "$[1].first_acquired_at", "null");
    assert_json(json, "$[1].max_mi", "0.5");
    assert_json_type(json, "$[1].max_tis", "null");
    free(json);

    assert_int_equal(store_studies_json(f->store, "2024-03-01", "2024-03-01", &json, &error),
                     MITILOG_OK);
    assert_json_length(json, 1);
    assert_json(json, "$[0].study_instance_uid", "9.1");
    free(json);
    assert_int_equal(store_studies_json(f->store, "2024-03-02", NULL, &json, &error), MITILOG_OK);
    assert_json(json, "$[0].study_instance_uid", "9.2");
    free(json);
    assert_int_equal(store_studies_json(f->store, "2024-03-03", "2024-12-31", &json, &error),
                     MITILOG_OK);
    assert_string_equal(json, "[]");
    free(json);

    /* Instances of study A in acquisition order, and the limit. */
    store_instance_filter filter = {"9.1", NULL, 2};
    assert_int_equal(store_instances_json(f->store, &filter, &json, &error), MITILOG_OK);
    assert_json_length(json, 2);
    assert_json(json, "$[0].sop_instance_uid", "9.1.1");
    assert_json(json, "$[1].sop_instance_uid", "9.1.2");
    free(json);
}

static void health_counts(void **state)
{
    fixture *f = *state;
    char *json = NULL;
    mitilog_error error = {{0}};
    assert_int_equal(store_health_json(f->store, &json, &error), MITILOG_OK);
    assert_json(json, "$.status", "ok");
    assert_json(json, "$.database", "ok");
    char version[16];
    snprintf(version, sizeof version, "%d", newest_migration());
    assert_json(json, "$.schema_version", version);
    assert_json(json, "$.instances", "0");
    assert_json_type(json, "$.last_received_at", "null");
    free(json);

    put_study_instance(f->store, "8.1.1", "8.1", "R", NULL, "2024-05-01T10:00:00.000Z", 0.2, 0.1);
    put_study_instance(f->store, "8.2.1", "8.2", "R", NULL, "2024-05-02T10:00:00.000Z", 0.2, 0.1);
    store_rejection rejection = {
        "2024-05-02T10:00:01.000Z", "SCANNER1", "10.0.0.5", "1.2.840.10008.5.1.4.1.1.7", "", "", "",
        "no SOP Instance UID"};
    assert_int_equal(store_put_rejection(f->store, &rejection, &error), MITILOG_OK);
    assert_int_equal(store_health_json(f->store, &json, &error), MITILOG_OK);
    assert_json(json, "$.instances", "2");
    assert_json(json, "$.studies", "2");
    assert_json(json, "$.rejections", "1");
    assert_json(json, "$.last_received_at", "2024-05-02T10:00:00.000Z");
    free(json);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM rejections "
                                        "WHERE reason = 'no SOP Instance UID' "
                                        "AND peer_address = '10.0.0.5'"),
                     1);
}

/* Runs SQL on the database file with a separate connection (committed
 * before it returns), failing the test on error. */
static void exec_sql(const char *path, const char *sql)
{
    sqlite3 *db = NULL;
    char *message = NULL;
    assert_int_equal(sqlite3_open(path, &db), SQLITE_OK);
    sqlite3_busy_timeout(db, 5000);
    if (sqlite3_exec(db, sql, NULL, NULL, &message) != SQLITE_OK)
        fail_msg("%s: %s", sql, message);
    sqlite3_free(message);
    sqlite3_close(db);
}

/* What the store runs after it writes an exam (store_refresh_summary),
 * for every exam the database holds: its summary row, then its times. */
static void refresh_every_summary(const char *path)
{
    static const char *const files[] = {"queries/exams/exam_summary_delete.sql",
                                        "queries/exams/exam_summary_insert.sql",
                                        "queries/exams/exam_time_at_or_above_delete.sql",
                                        "queries/exams/exam_time_at_or_above_insert.sql"};
    sqlite3 *db = NULL;
    sqlite3_stmt *exams = NULL;
    assert_int_equal(sqlite3_open(path, &db), SQLITE_OK);
    assert_int_equal(
        sqlite3_prepare_v2(db, "SELECT study_instance_uid FROM exams", -1, &exams, NULL),
        SQLITE_OK);
    while (sqlite3_step(exams) == SQLITE_ROW) {
        for (size_t i = 0; i < sizeof files / sizeof files[0]; i++) {
            sqlite3_stmt *statement = NULL;
            assert_int_equal(sqlite3_prepare_v2(db, sql_file_text(files[i]), -1, &statement, NULL),
                             SQLITE_OK);
            sqlite3_bind_text(statement, 1, (const char *)sqlite3_column_text(exams, 0), -1,
                              SQLITE_TRANSIENT);
            assert_int_equal(sqlite3_step(statement), SQLITE_DONE);
            sqlite3_finalize(statement);
        }
    }
    sqlite3_finalize(exams);
    sqlite3_close(db);
}

/* A policy row added makes it the current policy: every exam summary
 * then names it as the policy of its measurement (with no seconds: that
 * policy has not measured the exam); registering an older policy again
 * updates its row and leaves the current policy as it was (the policy refresh the store runs,
 * exam_summary_policy_refresh.sql). Common practice, no source. */
static void new_policy_refreshes_summaries(void **state)
{
    fixture *f = *state;
    exec_sql(f->path,
             "INSERT INTO exams (study_instance_uid, exam_type, exam_type_source, "
             "governing_index, governing_index_source, first_acquired_at, instance_count, "
             "capture_count, cine_count, sr_count, other_count, max_tis, estimated_seconds, "
             "unscaled_seconds, scale, span_seconds, timed_count, untimed_count, "
             "capped_count, gap_cap_seconds, updated_at) VALUES ('1.5', 'abdomen', 'test', "
             "'tis', 'test', '2024-03-01T10:00:00', 0, 0, 0, 0, 0, 1.5, 60, 60, 1, 60, 0, 0, 0, "
             "120, 'now')");
    refresh_every_summary(f->path);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM exam_summaries "
                                        "WHERE measured_policy IS NULL"),
                     1);
    mitilog_error error = {{0}};
    store_policy policy = {"v-one", "first", "", 30, 120, NULL, 0, NULL, 0};
    assert_int_equal(store_register_policy(f->store, &policy, &error), MITILOG_OK);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM exam_summaries "
                                        "WHERE measured_policy = 'v-one' "
                                        "AND measured_seconds IS NULL"),
                     1);
    policy.version = "v-two";
    policy.name = "second";
    assert_int_equal(store_register_policy(f->store, &policy, &error), MITILOG_OK);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM exam_summaries "
                                        "WHERE measured_policy = 'v-two'"),
                     1);
    /* the first again: an update of its row, not a new current policy */
    policy.version = "v-one";
    assert_int_equal(store_register_policy(f->store, &policy, &error), MITILOG_OK);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM exam_summaries "
                                        "WHERE measured_policy = 'v-two'"),
                     1);
}

/* The exam-row loaders: exams of five days written out of UID order; a
 * period returns its exams sorted by Study Instance UID (the order reports
 * sum in), only the text columns asked for, the same exams whichever of
 * the three row queries is chosen, and the baseline loader stops before
 * its end day. Common practice, no source. */
static void exam_rows_sorted_by_uid(void **state)
{
    fixture *f = *state;
    static const char *const exams[][2] = {{"1.9", "2024-03-01"},  {"1.4", "2024-03-02"},
                                           {"1.30", "2024-03-02"}, {"1.10", "2024-03-03"},
                                           {"1.2", "2024-03-04"},  {"1.1", "2024-03-05"}};
    for (size_t i = 0; i < sizeof exams / sizeof exams[0]; i++) {
        char sql[1024];
        snprintf(sql, sizeof sql,
                 "INSERT INTO exams (study_instance_uid, exam_type, exam_type_source, "
                 "governing_index, governing_index_source, first_acquired_at, instance_count, "
                 "capture_count, cine_count, sr_count, other_count, max_tis, estimated_seconds, "
                 "unscaled_seconds, scale, span_seconds, timed_count, untimed_count, "
                 "capped_count, gap_cap_seconds, updated_at) VALUES ('%s', 'abdomen', 'test', "
                 "'tis', 'test', '%sT10:00:00', 0, 0, 0, 0, 0, %zu.5, 60, 60, 1, 60, 0, 0, 0, "
                 "120, 'now')",
                 exams[i][0], exams[i][1], i);
        exec_sql(f->path, sql);
    }
    /* What the store does in the transaction that writes an exam. */
    refresh_every_summary(f->path);
    store_exam_list list = {0};
    mitilog_error error = {{0}};
    assert_int_equal(store_load_exam_rows(f->store, "2024-03-02", "2024-03-04", STORE_EXAM_IDENTITY,
                                          &list, &error),
                     MITILOG_OK);
    /* strcmp order "1.10" < "1.2" < "1.30" < "1.4", not the days' order */
    static const char *const expected[] = {"1.10", "1.2", "1.30", "1.4"};
    assert_int_equal(list.count, 4);
    for (size_t i = 0; i < list.count; i++) {
        assert_string_equal(list.rows[i].study_instance_uid, expected[i]);
        assert_non_null(list.rows[i].day);
        assert_string_equal(list.rows[i].exam_type, "abdomen");
        assert_null(list.rows[i].room); /* not asked for */
        assert_int_equal(list.rows[i].has_governing, 1);
    }
    assert_string_equal(list.rows[0].day, "2024-03-03");
    store_exam_list_free(&list);
    /* the short rows of statistics: same exams, same order */
    assert_int_equal(
        store_load_exam_rows(f->store, "2024-03-02", "2024-03-04", STORE_EXAM_ROOM, &list, &error),
        MITILOG_OK);
    assert_int_equal(list.count, 4);
    for (size_t i = 0; i < list.count; i++) {
        assert_string_equal(list.rows[i].study_instance_uid, expected[i]);
        assert_null(list.rows[i].day);
    }
    store_exam_list_free(&list);
    /* the short rows of drift: same exams, same order, the day with them */
    assert_int_equal(store_load_exam_rows(f->store, "2024-03-02", "2024-03-04",
                                          STORE_EXAM_DAY | STORE_EXAM_ROOM | STORE_EXAM_PRESET,
                                          &list, &error),
                     MITILOG_OK);
    static const char *const expected_days[] = {"2024-03-03", "2024-03-04", "2024-03-02",
                                                "2024-03-02"};
    static const double expected_governing[] = {3.5, 4.5, 2.5, 1.5};
    assert_int_equal(list.count, 4);
    for (size_t i = 0; i < list.count; i++) {
        assert_string_equal(list.rows[i].study_instance_uid, expected[i]);
        assert_string_equal(list.rows[i].day, expected_days[i]);
        assert_string_equal(list.rows[i].exam_type, "abdomen");
        assert_int_equal(list.rows[i].has_governing, 1);
        assert_true(list.rows[i].max_governing == expected_governing[i]);
        assert_null(list.rows[i].first_acquired_at); /* identity not asked for */
        assert_null(list.rows[i].shift);
    }
    store_exam_list_free(&list);
    /* a baseline: from the first day, before the end day */
    assert_int_equal(store_load_exam_governing(f->store, "2024-03-01", "2024-03-04", &list, &error),
                     MITILOG_OK);
    assert_int_equal(list.count, 4);
    double sum = 0;
    for (size_t i = 0; i < list.count; i++)
        sum += list.rows[i].max_governing;
    assert_true(sum == 0.5 + 1.5 + 2.5 + 3.5);
    store_exam_list_free(&list);
    store_exam_list_free(&list); /* a freed list is empty */
}

/* Screen profiles: a learned profile is proposed with the next version of
 * its key, one version at a time is active, activation keeps who confirmed
 * it, retiring leaves none active (common practice, no source). */
static void screen_profiles_states(void **state)
{
    fixture *f = *state;
    mitilog_error error = {{0}};
    char **texts = NULL;
    size_t count = 7;
    assert_int_equal(store_screen_profiles_active(f->store, &texts, &count, &error), MITILOG_OK);
    assert_int_equal(count, 0);
    assert_null(texts);

    store_screen_profile_new profile = {.key = "room-a",
                                        .manufacturer = "Acme",
                                        .rows = 480,
                                        .columns = 640,
                                        .text = "first",
                                        .example = (const unsigned char *)"P5 1 1 255 x",
                                        .example_size = 12};
    int version = 0;
    assert_int_equal(store_screen_profile_put(f->store, &profile, &version, &error), MITILOG_OK);
    assert_int_equal(version, 1);
    profile.text = "second";
    assert_int_equal(store_screen_profile_put(f->store, &profile, &version, &error), MITILOG_OK);
    assert_int_equal(version, 2);
    /* Proposed profiles are not read with. */
    assert_int_equal(store_screen_profiles_active(f->store, &texts, &count, &error), MITILOG_OK);
    assert_int_equal(count, 0);

    assert_int_equal(store_screen_profile_activate(f->store, "room-a", 1, "j.doe", &error),
                     MITILOG_OK);
    assert_int_equal(store_screen_profile_activate(f->store, "room-a", 2, "j.doe", &error),
                     MITILOG_OK);
    assert_int_equal(store_screen_profiles_active(f->store, &texts, &count, &error), MITILOG_OK);
    assert_int_equal(count, 1);
    assert_string_equal(texts[0], "second");
    free(texts[0]);
    free(texts);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM screen_profiles "
                                        "WHERE state = 'retired' AND version = 1"),
                     1);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM screen_profiles WHERE "
                                        "confirmed_by = 'j.doe' AND state = 'active'"),
                     1);

    store_screen_profile_row row;
    assert_int_equal(store_screen_profile_get(f->store, "room-a", 0, &row, &error), MITILOG_OK);
    assert_int_equal(row.version, 2);
    assert_string_equal(row.state, "active");
    assert_int_equal(row.example_size, 12);
    store_screen_profile_row_free(&row);
    assert_int_equal(store_screen_profile_get(f->store, "room-b", 0, &row, &error),
                     MITILOG_ERROR_NOT_FOUND);
    assert_int_equal(store_screen_profile_activate(f->store, "room-a", 9, "j.doe", &error),
                     MITILOG_ERROR_NOT_FOUND);

    char *json = NULL;
    assert_int_equal(store_screen_profiles_json(f->store, &json, &error), MITILOG_OK);
    assert_non_null(strstr(json, "\"room-a\""));
    free(json);

    assert_int_equal(store_screen_profile_retire(f->store, "room-a", &error), MITILOG_OK);
    assert_int_equal(store_screen_profiles_active(f->store, &texts, &count, &error), MITILOG_OK);
    assert_int_equal(count, 0);
    assert_int_equal(store_screen_profile_retire(f->store, "room-a", &error),
                     MITILOG_ERROR_NOT_FOUND);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(durability_setting, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(exam_rows_sorted_by_uid, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(screen_profiles_states, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(new_policy_refreshes_summaries, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(open_creates_schema, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(put_and_read_back, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(header_copy_follows_its_row, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(mode_names_match_extraction, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(migration_4_keeps_modes, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(resend_replaces, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(concurrent_puts, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(reopen_keeps_schema_and_rows, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(read_only_database_fails_cleanly, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(full_database_fails_and_recovers, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(bad_record_fails_alone, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(bad_input_is_refused, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(studies_aggregate, fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(health_counts, fixture_setup, fixture_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
