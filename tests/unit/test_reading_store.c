/* Unit tests of the reading queue and the pixel readings in the store
 * (store_reading.h, migration 007): the queue row commits with its
 * instance, a re-sent object replaces it and a reading of the older copy
 * is discarded, a full queue records the reason, and the provenance the
 * rules read (which value is used, header/screen agreement within the
 * screen's rounding). Each test uses a real database file in a fresh
 * temporary directory. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "store/store.h"
#include "store/store_instances.h"
#include "store/store_readings.h"
#include "store/store_exams.h"

typedef struct fixture {
    char directory[64];
    char path[128];
    store *store;
} fixture;

static int fixture_setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    assert_non_null(f);
    snprintf(f->directory, sizeof f->directory, "/tmp/mitilog-reading-XXXXXX");
    assert_non_null(mkdtemp(f->directory));
    snprintf(f->path, sizeof f->path, "%s/mitilog.db", f->directory);
    mitilog_error error = {{0}};
    if (store_open(f->path, 5000, &f->store, &error) != MITILOG_OK)
        fail_msg("store_open: %s", error.text);
    *state = f;
    return 0;
}

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
    rmdir(f->directory);
    free(f);
    return 0;
}

/* A US image record with every index missing but MI (when mi >= 0). */
static void make_record(ext_record *record, const char *uid, double mi)
{
    memset(record, 0, sizeof *record);
    record->sop_class_uid = strdup("1.2.840.10008.5.1.4.1.1.6.1");
    record->sop_instance_uid = strdup(uid);
    record->study_instance_uid = strdup("1.2.826.0.1.3680043.9.9.1");
    record->modality = strdup("US");
    record->calling_ae_title = strdup("SCANNER1");
    snprintf(record->acquired_at, sizeof record->acquired_at, "2026-12-01T10:00:00");
    record->acquired_at_source = EXT_TIME_ACQUISITION;
    record->number_of_frames.status = EXAM_VALUE_MISSING;
    record->frame_time_ms.status = EXAM_VALUE_MISSING;
    record->is_ultrasound = 1;
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        record->indices[i].status = EXAM_VALUE_MISSING;
    if (mi >= 0) {
        record->indices[EXAM_INDEX_MI] = (exam_number){EXAM_VALUE_OK, mi};
        char text[32];
        snprintf(text, sizeof text, "%g", mi);
        record->index_raw[EXAM_INDEX_MI] = strdup(text);
    }
}

static void free_record(ext_record *record)
{
    free(record->sop_class_uid);
    free(record->sop_instance_uid);
    free(record->study_instance_uid);
    free(record->modality);
    free(record->calling_ae_title);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        free(record->index_raw[i]);
}

static long long put(store *st, const char *uid, double mi, const char *path,
                     const char *not_read_reason, char **stale)
{
    ext_record record;
    make_record(&record, uid, mi);
    store_reading_request request = {path, 1, 1000, not_read_reason};
    long long id = 0;
    mitilog_error error = {{0}};
    if (store_put_instance_read(st, &record, NULL, &request, NULL, &id, stale, &error) !=
        MITILOG_OK)
        fail_msg("put: %s", error.text);
    free_record(&record);
    return id;
}

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

/* The result of reading MI as text with decimals (other indices not
 * shown). */
static mitilog_status write_mi(store *st, long long id, const char *path, double value,
                               const char *text, int decimals, int *stale)
{
    store_screen_result result = {.instance_id = id,
                                  .path = path,
                                  .read = 1,
                                  .profile_key = "kestrel-320",
                                  .profile_version = 1,
                                  .frames_read = 1};
    for (int i = 0; i < EXAM_INDEX_COUNT; i++)
        result.values[i].status = "not_shown";
    result.values[EXAM_INDEX_MI] = (store_screen_value){"read", value, decimals, text, NULL};
    mitilog_error error = {{0}};
    mitilog_status status = store_put_screen_result(st, &result, stale, &error);
    if (status != MITILOG_OK)
        fail_msg("result: %s", error.text);
    return status;
}

/* The MI value and status the rules read (store_load_study). */
static void study_mi(store *st, exam_number *mi)
{
    ext_exam_instance *instances = NULL;
    size_t count = 0;
    mitilog_error error = {{0}};
    assert_int_equal(store_load_study(st, "1.2.826.0.1.3680043.9.9.1", &instances, &count, &error),
                     MITILOG_OK);
    assert_int_equal(count, 1);
    *mi = instances[0].indices[EXAM_INDEX_MI];
    store_study_free(instances, count);
}

/* --- tests --------------------------------------------------------------- */

/* The queue row and the 'queued' state commit with the instance row; the
 * queue lists it for the next start (common practice, no source). */
static void queue_row_commits_with_its_instance(void **state)
{
    fixture *f = *state;
    char *stale = NULL;
    long long id = put(f->store, "1.2.3.1", -1, "/spool/a.dcm", NULL, &stale);
    assert_null(stale);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM reading_queue"), 1);
    assert_int_equal(
        query_int(f->path, "SELECT count(*) FROM screen_readings WHERE state = 'queued'"), 1);
    store_reading_entry *entries = NULL;
    size_t count = 0;
    mitilog_error error = {{0}};
    assert_int_equal(store_reading_queue_load(f->store, &entries, &count, &error), MITILOG_OK);
    assert_int_equal(count, 1);
    assert_int_equal(entries[0].instance_id, id);
    assert_string_equal(entries[0].path, "/spool/a.dcm");
    assert_string_equal(entries[0].sop_instance_uid, "1.2.3.1");
    assert_int_equal(entries[0].owned, 1);
    store_reading_entries_free(entries, count);
}

/* A re-sent object replaces the queue row (the older spool copy is handed
 * back to be deleted) and a reading of the older copy is discarded: what
 * is kept belongs to the latest receipt (as header copies, migration 004). */
static void resend_replaces_and_stale_reading_is_discarded(void **state)
{
    fixture *f = *state;
    char *stale = NULL;
    long long id = put(f->store, "1.2.3.2", -1, "/spool/old.dcm", NULL, &stale);
    assert_null(stale);
    long long again = put(f->store, "1.2.3.2", -1, "/spool/new.dcm", NULL, &stale);
    assert_int_equal(again, id);
    assert_non_null(stale);
    assert_string_equal(stale, "/spool/old.dcm");
    free(stale);
    int is_stale = 0;
    write_mi(f->store, id, "/spool/old.dcm", 1.2, "1.2", 1, &is_stale);
    assert_int_equal(is_stale, 1);
    assert_int_equal(
        query_int(f->path, "SELECT count(*) FROM screen_readings WHERE state = 'queued'"), 1);
    write_mi(f->store, id, "/spool/new.dcm", 1.2, "1.2", 1, &is_stale);
    assert_int_equal(is_stale, 0);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM reading_queue"), 0);
    assert_int_equal(
        query_int(f->path, "SELECT count(*) FROM screen_readings WHERE state = 'read'"), 1);
}

/* A full queue: no queue row, state 'not_read' with the reason. */
static void full_queue_is_recorded_with_its_reason(void **state)
{
    fixture *f = *state;
    put(f->store, "1.2.3.3", -1, NULL, "reading queue full", NULL);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM reading_queue"), 0);
    assert_int_equal(query_int(f->path, "SELECT count(*) FROM screen_readings WHERE state = "
                                        "'not_read' AND reason = 'reading queue full'"),
                     1);
}

/* Header MI 1.0, the screen showed 1.3: the rules use the screen's by
 * default and the header's with index_source = header; it is a mismatch
 * (more than half a unit of the one decimal drawn apart; common practice,
 * no source). */
static void screen_value_is_used_and_mismatch_found(void **state)
{
    fixture *f = *state;
    long long id = put(f->store, "1.2.3.4", 1.0, "/spool/d.dcm", NULL, NULL);
    exam_number mi;
    study_mi(f->store, &mi);
    assert_int_equal(mi.status, EXAM_VALUE_OK);
    assert_true(mi.value == 1.0); /* not read yet: the header's */
    int stale = 0;
    write_mi(f->store, id, "/spool/d.dcm", 1.3, "1.3", 1, &stale);
    study_mi(f->store, &mi);
    assert_true(mi.value == 1.3);
    mitilog_error error = {{0}};
    assert_int_equal(store_set_index_source(f->store, "header", &error), MITILOG_OK);
    study_mi(f->store, &mi);
    assert_true(mi.value == 1.0);
    store_mismatch *rows = NULL;
    size_t count = 0;
    assert_int_equal(
        store_load_mismatches(f->store, "1.2.826.0.1.3680043.9.9.1", &rows, &count, &error),
        MITILOG_OK);
    assert_int_equal(count, 1);
    assert_string_equal(rows[0].index, "mi");
    assert_true(rows[0].header_value == 1.0 && rows[0].screen_value == 1.3);
    assert_string_equal(rows[0].profile_key, "kestrel-320");
    store_mismatches_free(rows, count);
    assert_int_not_equal(store_set_index_source(f->store, "both", &error), MITILOG_OK);
}

/* Header 0.72 and a screen showing 0.7 (one decimal) agree: a display
 * rounds to the digits it draws; 0.76 and 0.7 do not (common practice,
 * no source). */
static void rounding_of_the_screen_is_not_a_mismatch(void **state)
{
    fixture *f = *state;
    long long id = put(f->store, "1.2.3.5", 0.72, "/spool/e.dcm", NULL, NULL);
    int stale = 0;
    write_mi(f->store, id, "/spool/e.dcm", 0.7, "0.7", 1, &stale);
    store_mismatch *rows = NULL;
    size_t count = 0;
    mitilog_error error = {{0}};
    assert_int_equal(
        store_load_mismatches(f->store, "1.2.826.0.1.3680043.9.9.1", &rows, &count, &error),
        MITILOG_OK);
    assert_int_equal(count, 0);
    store_mismatches_free(rows, count);
    id = put(f->store, "1.2.3.5", 0.76, "/spool/f.dcm", NULL, NULL);
    write_mi(f->store, id, "/spool/f.dcm", 0.7, "0.7", 1, &stale);
    assert_int_equal(
        store_load_mismatches(f->store, "1.2.826.0.1.3680043.9.9.1", &rows, &count, &error),
        MITILOG_OK);
    assert_int_equal(count, 1);
    store_mismatches_free(rows, count);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(queue_row_commits_with_its_instance, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(resend_replaces_and_stale_reading_is_discarded,
                                        fixture_setup, fixture_teardown),
        cmocka_unit_test_setup_teardown(full_queue_is_recorded_with_its_reason, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(screen_value_is_used_and_mismatch_found, fixture_setup,
                                        fixture_teardown),
        cmocka_unit_test_setup_teardown(rounding_of_the_screen_is_not_a_mismatch, fixture_setup,
                                        fixture_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
