/*
 * test_rules_store.c - findings in a real SQLite file (store_findings.c):
 * written, replaced under the same policy version, superseded under a new
 * one; re-evaluating with the same content changes nothing (the whole
 * findings table compared before and after); the exam_mode to Image Type
 * bit mapping of the ingest. Expected values: docs/policy.md ("A finding",
 * "Version") and the design rule "rescoring twice under the same
 * policy changes nothing"; bit values DICOM PS3.3 C.8.5.6.1.1.
 */
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

#include "extract/ext_modes.h"
#include "ingest/ingest_internal.h"
#include "store/store.h"
#include "store/store_findings.h"

typedef struct fixture {
    char directory[64];
    char path[128];
    store *store;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    snprintf(f->directory, sizeof f->directory, "/tmp/mitilog-rules-store-XXXXXX");
    assert_non_null(mkdtemp(f->directory));
    snprintf(f->path, sizeof f->path, "%s/db.sqlite3", f->directory);
    mitilog_error error;
    assert_int_equal(store_open(f->path, 5000, &f->store, &error), MITILOG_OK);
    /* exam_context refers to exams: a minimal exam row, written with a
     * second connection (WAL: the store's connections see it). */
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(f->path, &db), SQLITE_OK);
    assert_int_equal(
        sqlite3_exec(
            db,
            "INSERT INTO exams (study_instance_uid, exam_type_source, governing_index, "
            "governing_index_source, instance_count, capture_count, cine_count, sr_count, "
            "other_count, estimated_seconds, unscaled_seconds, scale, span_seconds, timed_count, "
            "untimed_count, capped_count, gap_cap_seconds, updated_at) VALUES "
            "('1.2.3', 'none', 'tis', 'default', 1, 1, 0, 0, 0, 60, 60, 1, 0, 1, 0, 0, 300, 'x')",
            NULL, NULL, NULL),
        SQLITE_OK);
    sqlite3_close(db);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    store_close(f->store);
    char command[256];
    snprintf(command, sizeof command, "rm -rf '%s'", f->directory);
    assert_int_equal(system(command), 0);
    free(f);
    return 0;
}

/* Every column of every row, in id order, as one text. */
static char *table_text(const fixture *f, const char *sql)
{
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open_v2(f->path, &db, SQLITE_OPEN_READONLY, NULL), SQLITE_OK);
    sqlite3_stmt *statement = NULL;
    assert_int_equal(sqlite3_prepare_v2(db, sql, -1, &statement, NULL), SQLITE_OK);
    size_t size = 1;
    char *text = calloc(1, 1);
    while (sqlite3_step(statement) == SQLITE_ROW) {
        for (int c = 0; c < sqlite3_column_count(statement); c++) {
            const char *value = (const char *)sqlite3_column_text(statement, c);
            size_t add = strlen(value ? value : "NULL") + 2;
            text = realloc(text, size + add);
            strcat(text, value ? value : "NULL");
            strcat(text, c + 1 < sqlite3_column_count(statement) ? "|" : "\n");
            size += add;
        }
    }
    sqlite3_finalize(statement);
    sqlite3_close(db);
    return text;
}

static long count_of(const fixture *f, const char *sql)
{
    char *text = table_text(f, sql);
    long value = strtol(text, NULL, 10);
    free(text);
    return value;
}

static char *uids[] = {"1.2.3.1", "1.2.3.2"};

static store_evaluation exam_evaluation(const char *version, exam_finding *findings,
                                        exam_measurements *measurements, double measured)
{
    *measurements = (exam_measurements){.governing_index = EXAM_INDEX_TIS, .estimated_seconds = 60};
    measurements->index_reported[EXAM_INDEX_TIS] = 1;
    measurements->max_index[EXAM_INDEX_TIS] = measured;
    findings[0] = (exam_finding){.rule_id = "ti_ceiling",
                                 .severity = EXAM_SEVERITY_WARNING,
                                 .quantity = "tis",
                                 .unit = "",
                                 .measured = measured,
                                 .has_limit = 1,
                                 .limit = 2.0,
                                 .index = EXAM_INDEX_TIS,
                                 .has_index = 1,
                                 .instance_uids = uids,
                                 .instance_count = 2,
                                 .has_span = 1,
                                 .first_seconds = 63900000000.0,
                                 .last_seconds = 63900000060.0,
                                 .estimated_seconds = 60,
                                 .assumptions = "estimate: gap cap 300 s",
                                 .source = "TI 2.0 [trade]",
                                 .provisional = 1};
    findings[1] = findings[0];
    findings[1].rule_id = "equipment_maxima";
    findings[1].severity = EXAM_SEVERITY_VIOLATION;
    findings[1].quantity = "mi";
    findings[1].measured = 2.1;
    findings[1].limit = 1.9;
    findings[1].instance_count = 1;
    return (store_evaluation){.policy_version = version,
                              .normalised_text = "n",
                              .study_instance_uid = "1.2.3",
                              .exam_type = "abdomen",
                              .room = "Room 1",
                              .preset = "ABD",
                              .shift = "night",
                              .last_received_at = "2026-11-02T10:00:00Z",
                              .closed = 0,
                              .findings = findings,
                              .finding_count = 2,
                              .measurements = measurements};
}

static const char *const all_findings = "SELECT * FROM findings ORDER BY id";

static void test_written_replaced_superseded(void **state)
{
    fixture *f = *state;
    mitilog_error error;
    exam_finding findings[2];
    exam_measurements measurements;
    store_evaluation evaluation = exam_evaluation("v1", findings, &measurements, 2.5);
    store_evaluation_counts counts = {0};
    assert_int_equal(store_put_evaluation(f->store, &evaluation, &counts, &error), MITILOG_OK);
    assert_int_equal(counts.written, 2);
    assert_int_equal(count_of(f, "SELECT count(*) FROM findings WHERE policy_version = 'v1' "
                                 "AND superseded = 0 AND provisional = 1"),
                     2);
    /* The span goes back to ISO 8601 (seconds since 0001-01-01): 63900000000 s
     * is 2025-11-29T08:00:00 (checked with Python datetime(1,1,1) + timedelta). */
    char *started = table_text(f, "SELECT started_at, instance_uids FROM findings "
                                  "WHERE rule_id = 'ti_ceiling'");
    assert_string_equal(started, "2025-11-29T08:00:00|[\"1.2.3.1\",\"1.2.3.2\"]\n");
    free(started);

    /* Same version, new content: replaced, not superseded. */
    evaluation = exam_evaluation("v1", findings, &measurements, 2.7);
    evaluation.closed = 1;
    findings[0].provisional = findings[1].provisional = 0;
    memset(&counts, 0, sizeof counts);
    assert_int_equal(store_put_evaluation(f->store, &evaluation, &counts, &error), MITILOG_OK);
    assert_int_equal(counts.written, 2);
    assert_int_equal(counts.superseded, 0);
    assert_int_equal(count_of(f, "SELECT count(*) FROM findings"), 2);
    assert_int_equal(count_of(f, "SELECT count(*) FROM findings WHERE measured_value = 2.7 "
                                 "AND provisional = 0"),
                     1);
    assert_int_equal(count_of(f, "SELECT closed FROM exam_context"), 1);

    /* A new version: the old findings are kept, superseded. */
    evaluation = exam_evaluation("v2", findings, &measurements, 2.7);
    memset(&counts, 0, sizeof counts);
    assert_int_equal(store_put_evaluation(f->store, &evaluation, &counts, &error), MITILOG_OK);
    assert_int_equal(counts.superseded, 2);
    assert_int_equal(count_of(f, "SELECT count(*) FROM findings WHERE policy_version = 'v1' "
                                 "AND superseded = 1"),
                     2);
    assert_int_equal(count_of(f, "SELECT count(*) FROM findings WHERE policy_version = 'v2' "
                                 "AND superseded = 0"),
                     2);
    assert_int_equal(count_of(f, "SELECT count(*) FROM exam_measurements"), 2);
}

/* The property: the same evaluation twice leaves the tables identical. */
static void test_rescoring_twice_changes_nothing(void **state)
{
    fixture *f = *state;
    mitilog_error error;
    exam_finding findings[2];
    exam_measurements values;
    store_evaluation evaluation = exam_evaluation("v1", findings, &values, 2.5);
    assert_int_equal(store_put_evaluation(f->store, &evaluation, NULL, &error), MITILOG_OK);
    exam_finding device[1] = {{.rule_id = "output_not_reported",
                               .severity = EXAM_SEVERITY_ADVISORY,
                               .quantity = "instances_without_index",
                               .unit = "instances",
                               .measured = 1,
                               .has_limit = 1,
                               .limit = 1,
                               .instance_uids = uids,
                               .instance_count = 1,
                               .room = "Room 2",
                               .transducer = "C5-1"}};
    store_evaluation day = {.policy_version = "v1",
                            .rule_id = "output_not_reported",
                            .period = "2026-11-02",
                            .closed = 1,
                            .findings = device,
                            .finding_count = 1};
    assert_int_equal(store_put_evaluation(f->store, &day, NULL, &error), MITILOG_OK);
    char *before = table_text(f, all_findings);
    char *measurements = table_text(f, "SELECT * FROM exam_measurements ORDER BY 1, 2");
    store_evaluation_counts counts = {0};
    assert_int_equal(store_put_evaluation(f->store, &evaluation, &counts, &error), MITILOG_OK);
    assert_int_equal(store_put_evaluation(f->store, &day, &counts, &error), MITILOG_OK);
    assert_int_equal(counts.evaluations, 2);
    assert_int_equal(counts.unchanged, 2);
    assert_int_equal(counts.written, 0);
    char *after = table_text(f, all_findings);
    char *measurements_after = table_text(f, "SELECT * FROM exam_measurements ORDER BY 1, 2");
    assert_string_equal(before, after);
    assert_string_equal(measurements, measurements_after);
    assert_int_equal(count_of(f, "SELECT count(*) FROM findings WHERE study_instance_uid IS NULL "
                                 "AND period = '2026-11-02' AND room = 'Room 2'"),
                     1);
    free(before);
    free(after);
    free(measurements);
    free(measurements_after);
}

/* The rules read the mode bits extraction sets (one bit set, no
 * conversion between stages): Image Type value 4 0100 is colour power,
 * which counts as Doppler; 0040 (3D) does not [DICOM PS3.3 C.8.5.6.1.1]. */
static void test_mode_bits(void **state)
{
    (void)state;
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\ABDOMINAL\\0001").modes,
                     EXAM_MODE_BIT(EXAM_MODE_2D));
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\ABDOMINAL\\0008").modes,
                     EXAM_MODE_BIT(EXAM_MODE_PW));
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\ABDOMINAL\\0040").modes,
                     EXAM_MODE_BIT(EXAM_MODE_3D));
    assert_int_equal(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\ABDOMINAL\\0100").modes,
                     EXAM_MODE_BIT(EXAM_MODE_POWER));
    assert_true(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\ABDOMINAL\\0101").modes &
                EXAM_MODES_DOPPLER);
    assert_false(ext_modes_from_image_type("ORIGINAL\\PRIMARY\\ABDOMINAL\\0041").modes &
                 EXAM_MODES_DOPPLER);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_written_replaced_superseded, setup, teardown),
        cmocka_unit_test_setup_teardown(test_rescoring_twice_changes_nothing, setup, teardown),
        cmocka_unit_test(test_mode_bits),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
