/*
 * store_exams.c - the store's exams (store_exams.h): one exam record
 * (exams) with its timeline (exam_timeline) and per-mode maxima
 * (exam_mode_maxima), replacing what the study had, with the study's
 * summary rows refreshed in the same transaction; a study's instances for
 * ext_exam_build(); the JSON of one exam; the lists of exams in a period
 * or due closing; and the database's copy of the exam vocabulary (TI
 * ladder, mode names). SQL: sql/queries/exams/.
 */
#include "store/store_exams.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "extract/ext_text.h"
#include "store/store_internal.h"
#include "util/log.h"

static void store_exam_bind(store_query *query, const store_exam *input)
{
    const ext_exam *exam = input->exam;
    const struct {
        const char *name;
        const char *value;
    } texts[] = {
        {":study_instance_uid", input->study_instance_uid},
        {":exam_type", exam->exam_type != NULL ? exam->exam_type->key : NULL},
        {":exam_type_label", exam->exam_type != NULL ? exam->exam_type->label : NULL},
        {":exam_type_source", exam->exam_type_source},
        {":governing_index", exam_index_name(exam->governing_index)},
        {":governing_index_source", exam->governing_index_source},
        {":exam_group", exam_group_name(ext_exam_type_group(exam->exam_type))},
        {":gestational_age_source",
         exam->has_gestational_age ? exam->gestational_age_source : NULL},
        {":first_acquired_at", exam->first_acquired_at},
        {":last_acquired_at", exam->last_acquired_at},
    };
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++)
        store_bind_text(query, texts[i].name, texts[i].value);
    const struct {
        const char *name;
        long long value;
    } integers[] = {
        {":instance_count", (long long)exam->instance_count},
        {":capture_count", (long long)exam->capture_count},
        {":cine_count", (long long)exam->cine_count},
        {":sr_count", (long long)exam->sr_count},
        {":other_count", (long long)exam->other_count},
        {":timed_count", (long long)exam->summary.entry_count},
        {":untimed_count", (long long)exam->summary.untimed_count},
        {":capped_count", (long long)exam->summary.capped_count},
    };
    for (size_t i = 0; i < sizeof integers / sizeof integers[0]; i++)
        store_bind_integer(query, integers[i].name, integers[i].value);
    const struct {
        const char *name;
        int present;
        double value;
    } reals[] = {
        {":gestational_age_weeks", exam->has_gestational_age, exam->gestational_age_weeks},
        {":max_mi", exam->maxima[0].status == EXAM_VALUE_OK, exam->maxima[0].value},
        {":max_tis", exam->maxima[1].status == EXAM_VALUE_OK, exam->maxima[1].value},
        {":max_tib", exam->maxima[2].status == EXAM_VALUE_OK, exam->maxima[2].value},
        {":max_tic", exam->maxima[3].status == EXAM_VALUE_OK, exam->maxima[3].value},
        {":max_tis_focus", exam->maxima[4].status == EXAM_VALUE_OK, exam->maxima[4].value},
        {":max_tis_surface", exam->maxima[5].status == EXAM_VALUE_OK, exam->maxima[5].value},
        {":estimated_seconds", 1, exam->summary.estimated_seconds},
        {":unscaled_seconds", 1, exam->summary.unscaled_seconds},
        {":scale", 1, exam->summary.entry_count > 0 ? exam->summary.scale : 1.0},
        {":span_seconds", 1, exam->summary.span_seconds},
        {":gap_cap_seconds", 1, exam->gap_cap_seconds},
        {":sr_scan_time_seconds", exam->sr_scan_time_seconds > 0, exam->sr_scan_time_seconds},
    };
    for (size_t i = 0; i < sizeof reals / sizeof reals[0]; i++)
        store_bind_real(query, reals[i].name, reals[i].present, reals[i].value);
    /* NOT NULL columns: a non-finite sum must not become NULL silently. */
    for (size_t i = 7; query->status == MITILOG_OK && i <= 11; i++)
        if (!isfinite(reals[i].value))
            query->status = mitilog_error_set(&query->error, MITILOG_ERROR_DATABASE,
                                              "%s is not a finite number", reals[i].name + 1);
}

/* Runs a bound query to its end; 0 when it succeeded. */
static int store_exam_run(store_query *query)
{
    store_query_run(query);
    return store_query_end(query) == MITILOG_OK ? 0 : -1;
}

static int store_exam_children(store_link *writer, const store_exam *input, store_query *query)
{
    const ext_exam *exam = input->exam;
    for (size_t i = 0; i < exam->summary.entry_count; i++) {
        const ext_timeline_entry *entry = &exam->entries[i];
        size_t instance = exam->capture_instance[entry->capture];
        store_query_begin(query, writer, "queries/exams/exam_timeline_insert.sql");
        store_bind_text(query, ":study_instance_uid", input->study_instance_uid);
        store_bind_integer(query, ":position", (long long)i + 1);
        store_bind_text(query, ":sop_instance_uid", input->instances[instance].sop_instance_uid);
        store_bind_real(query, ":start_seconds", 1, entry->start_seconds);
        store_bind_real(query, ":interval_seconds", 1, entry->interval_seconds);
        store_bind_real(query, ":cine_seconds", 1, entry->cine_seconds);
        store_bind_real(query, ":attributed_seconds", 1, entry->attributed_seconds);
        store_bind_integer(query, ":capped", entry->capped ? 1 : 0);
        if (store_exam_run(query) != 0)
            return -1;
    }
    for (int m = 0; m < EXAM_MODE_COUNT; m++) {
        for (int x = 0; x < EXAM_INDEX_COUNT; x++) {
            exam_number maximum = exam->mode_maxima[m][x];
            if (maximum.status != EXAM_VALUE_OK)
                continue;
            store_query_begin(query, writer, "queries/exams/exam_mode_maximum_insert.sql");
            store_bind_text(query, ":study_instance_uid", input->study_instance_uid);
            store_bind_text(query, ":mode", exam_mode_name((exam_mode)m));
            store_bind_integer(query, ":rank", m);
            store_bind_text(query, ":index_name", exam_index_name((exam_index)x));
            store_bind_real(query, ":max_value", 1, maximum.value);
            if (store_exam_run(query) != 0)
                return -1;
        }
    }
    return 0;
}

mitilog_status store_exams_write(store_link *writer, const store_exam *input, mitilog_error *error)
{
    static const char *const deletes[] = {"queries/exams/exam_timeline_delete.sql",
                                          "queries/exams/exam_mode_maxima_delete.sql"};
    store_query query;
    int rc = 0;
    for (size_t i = 0; rc == 0 && i < 2; i++) {
        store_query_begin(&query, writer, deletes[i]);
        store_bind_text_at(&query, 1, input->study_instance_uid);
        rc = store_exam_run(&query);
    }
    if (rc == 0) {
        store_query_begin(&query, writer, "queries/exams/exam_upsert.sql");
        store_exam_bind(&query, input);
        rc = store_exam_run(&query);
    }
    if (rc == 0)
        rc = store_exam_children(writer, input, &query);
    if (rc != 0)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "exam %s: %s",
                                 input->study_instance_uid, query.error.text);
    return MITILOG_OK;
}

mitilog_status store_exams_refresh_summary(store_link *writer, const char *study_instance_uid,
                                           mitilog_error *error)
{
    /* Four statements, in this order: the times take the day and
     * governing index from the new summary row. */
    static const char *const names[] = {"queries/exams/exam_summary_delete.sql",
                                        "queries/exams/exam_summary_insert.sql",
                                        "queries/exams/exam_time_at_or_above_delete.sql",
                                        "queries/exams/exam_time_at_or_above_insert.sql"};
    for (size_t i = 0; i < sizeof names / sizeof names[0]; i++) {
        store_query query;
        store_query_begin(&query, writer, names[i]);
        store_bind_text_at(&query, 1, study_instance_uid);
        if (store_exam_run(&query) != 0)
            return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: exam summary: %s",
                                     study_instance_uid, query.error.text);
    }
    return MITILOG_OK;
}

/* 1 if text (may be NULL) is well-formed UTF-8: JSON output needs it. */
static int store_is_text_utf8(const char *text) { return text == NULL || ext_text_is_utf8(text); }

mitilog_status store_exams_check(const store_exam *exam, mitilog_error *error)
{
    if (exam == NULL || exam->exam == NULL || exam->study_instance_uid == NULL ||
        exam->study_instance_uid[0] == 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_put_exam: no exam or study");
    if (!store_is_text_utf8(exam->study_instance_uid) ||
        !store_is_text_utf8(exam->exam->exam_type_source) ||
        !store_is_text_utf8(exam->exam->gestational_age_source))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "exam: text is not UTF-8");
    return MITILOG_OK;
}

/* An exam record alone, with its summary (inside the batch's transaction). */
static mitilog_status store_write_exam_summarised(store_link *writer, void *context,
                                                  mitilog_error *error)
{
    const store_exam *exam = context;
    mitilog_status status = store_exams_write(writer, exam, error);
    if (status == MITILOG_OK)
        status = store_exams_refresh_summary(writer, exam->study_instance_uid, error);
    return status;
}

mitilog_status store_put_exam(store *st, const store_exam *exam, mitilog_error *error)
{
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_put_exam: no store");
    mitilog_status status = store_exams_check(exam, error);
    if (status != MITILOG_OK)
        return status;
    return store_commit_submit(st, store_write_exam_summarised, (void *)exam, error);
}

static exam_value_status store_status_of(const char *text)
{
    if (text == NULL)
        return EXAM_VALUE_MISSING;
    if (strcmp(text, "ok") == 0)
        return EXAM_VALUE_OK;
    return strcmp(text, "invalid") == 0 ? EXAM_VALUE_INVALID : EXAM_VALUE_MISSING;
}

static int store_fill_instance(store_query *query, ext_exam_instance *instance)
{
    int failed = 0;
    memset(instance, 0, sizeof *instance);
    instance->sop_instance_uid = store_column_copy(query, 0, &failed);
    instance->kind = store_column_copy(query, 1, &failed);
    instance->acquired_at = store_column_copy(query, 2, &failed);
    instance->exam_type = store_column_copy(query, 3, &failed);
    instance->exam_type_source = store_column_copy(query, 4, &failed);
    instance->is_capture = store_column_integer(query, 5) != 0 && instance->kind != NULL &&
                           strcmp(instance->kind, "sr") != 0;
    for (int x = 0; x < EXAM_INDEX_COUNT; x++) {
        instance->indices[x].status = store_status_of(store_column_text(query, 7 + 2 * x));
        if (instance->indices[x].status == EXAM_VALUE_OK)
            instance->indices[x].value = store_column_real(query, 6 + 2 * x);
    }
    instance->modes = (unsigned)store_column_integer(query, 18);
    instance->cine_seconds = store_column_real(query, 19);
    if (!store_column_is_null(query, 20)) {
        instance->has_sr_gestational_age = 1;
        instance->sr_gestational_age_weeks = store_column_real(query, 20);
        instance->sr_gestational_age_position = store_column_copy(query, 21, &failed);
    }
    if (!store_column_is_null(query, 22)) {
        instance->has_sr_scan_time = 1;
        instance->sr_scan_time_seconds = store_column_real(query, 22);
    }
    return failed ? -1 : 0;
}

mitilog_status store_load_study(store *st, const char *study_instance_uid,
                                ext_exam_instance **instances, size_t *count, mitilog_error *error)
{
    *instances = NULL;
    *count = 0;
    if (st == NULL || study_instance_uid == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_load_study: no study");
    mitilog_status status = MITILOG_OK;
    size_t capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/exams/study_load.sql");
    store_bind_text_at(&query, 1, study_instance_uid);
    while (status == MITILOG_OK && store_query_step(&query)) {
        if (*count == capacity) {
            size_t grown = capacity == 0 ? 16 : capacity * 2;
            ext_exam_instance *array = realloc(*instances, grown * sizeof *array);
            if (array == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
                break;
            }
            *instances = array;
            capacity = grown;
        }
        int failed = store_fill_instance(&query, &(*instances)[*count]);
        (*count)++;
        if (failed)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    if (store_query_end(&query) != MITILOG_OK && status == MITILOG_OK)
        status =
            mitilog_error_set(error, MITILOG_ERROR_DATABASE, "load study: %s", query.error.text);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_study_free(*instances, *count);
        *instances = NULL;
        *count = 0;
    }
    return status;
}

void store_study_free(ext_exam_instance *instances, size_t count)
{
    for (size_t i = 0; instances != NULL && i < count; i++) {
        free(instances[i].sop_instance_uid);
        free(instances[i].kind);
        free(instances[i].acquired_at);
        free(instances[i].exam_type);
        free(instances[i].exam_type_source);
        free(instances[i].sr_gestational_age_position);
    }
    free(instances);
}

mitilog_status store_study_json(store *st, const char *study_instance_uid, char **json,
                                mitilog_error *error)
{
    if (st == NULL || json == NULL || study_instance_uid == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_study_json: no study");
    *json = NULL;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/exams/study_detail.sql");
    store_bind_text_at(&query, 1, study_instance_uid);
    store_bind_text_at(&query, 2, st->active_policy[0] != '\0' ? st->active_policy : NULL);
    mitilog_status status = store_query_text(&query, "query study", 1, json, error);
    if (status == MITILOG_ERROR_NOT_FOUND)
        status =
            mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "no study %s", study_instance_uid);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_exams_in_period(store *st, const char *from_day, const char *to_day,
                                     char ***study_uids, size_t *count, mitilog_error *error)
{
    *study_uids = NULL;
    *count = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "exams in period: no store");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/exams/exams_in_period.sql");
    store_bind_filter_at(&query, 1, from_day);
    store_bind_filter_at(&query, 2, to_day);
    mitilog_status status = store_query_texts(&query, study_uids, count, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_exams_due_closing(store *st, double now_unix_seconds, double idle_seconds,
                                       char ***study_uids, size_t *count, mitilog_error *error)
{
    *study_uids = NULL;
    *count = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "exams due closing: no store");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/exams/exams_due_closing.sql");
    store_bind_real_at(&query, 1, now_unix_seconds);
    store_bind_real_at(&query, 2, idle_seconds);
    mitilog_status status = store_query_texts(&query, study_uids, count, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

/* 1 when the database's TI ladder (ti_thresholds) and mode names
 * (mode_names) are the exam vocabulary's, 0 when not, -1 on error;
 * *ladder_matches tells which. */
static int store_vocabulary_matches(store_link *writer, int *ladder_matches, mitilog_error *error)
{
    int thresholds_match = 1, modes_match = 1, count = 0;
    store_query ladder;
    store_query_begin(&ladder, writer, "queries/exams/ti_thresholds_select.sql");
    while (store_query_step(&ladder)) {
        if (count >= EXAM_TI_STEP_COUNT || store_column_real(&ladder, 0) != exam_ti_ladder[count])
            thresholds_match = 0;
        count++;
    }
    if (count != EXAM_TI_STEP_COUNT)
        thresholds_match = 0;
    mitilog_status status = store_query_end(&ladder);
    const char *reason = ladder.error.text;
    count = 0;
    store_query modes;
    if (status == MITILOG_OK) {
        store_query_begin(&modes, writer, "queries/exams/mode_names_select.sql");
        while (store_query_step(&modes)) {
            const char *name = store_column_text(&modes, 1);
            if (count >= EXAM_MODE_COUNT || store_column_integer(&modes, 0) != count ||
                name == NULL || strcmp(name, exam_mode_name((exam_mode)count)) != 0)
                modes_match = 0;
            count++;
        }
        status = store_query_end(&modes);
        reason = modes.error.text;
    }
    if (count != EXAM_MODE_COUNT)
        modes_match = 0;
    *ladder_matches = thresholds_match;
    if (status != MITILOG_OK) {
        mitilog_error_set(error, MITILOG_ERROR_DATABASE, "vocabulary of the database: %s", reason);
        return -1;
    }
    return thresholds_match && modes_match;
}

/* Runs a bound writer query to its end, or records why it failed. */
static mitilog_status store_vocabulary_run(store_query *query, mitilog_error *error)
{
    store_query_run(query);
    if (store_query_end(query) != MITILOG_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "%s: %s", query->name,
                                 query->error.text);
    return MITILOG_OK;
}

/* Makes the database's TI ladder and mode names the exam vocabulary's
 * (exam_ti_ladder, exam_mode_name()), in one transaction: when the ladder
 * differs, the thresholds are replaced and every exam's time at or above
 * them recomputed; when a mode name differs, the names are replaced
 * (a mode keeps its bit position: modes are only ever added at the end).
 * Another process that did it meanwhile leaves nothing to do. */
mitilog_status store_exams_sync_vocabulary(store_link *writer, const char *path,
                                           mitilog_error *error)
{
    int ladder_matches = 1;
    int matches = store_vocabulary_matches(writer, &ladder_matches, error);
    if (matches != 0)
        return matches > 0 ? MITILOG_OK : MITILOG_ERROR_DATABASE;
    mitilog_status status = store_link_script(writer, "queries/database/write_begin.sql", error);
    if (status != MITILOG_OK)
        return status;
    matches = store_vocabulary_matches(writer, &ladder_matches, error);
    if (matches < 0)
        status = MITILOG_ERROR_DATABASE;
    if (matches == 0 && !ladder_matches) {
        status = store_link_script(writer, "queries/exams/ti_thresholds_delete.sql", error);
        for (int k = 0; status == MITILOG_OK && k < EXAM_TI_STEP_COUNT; k++) {
            store_query insert;
            store_query_begin(&insert, writer, "queries/exams/ti_threshold_insert.sql");
            store_bind_real_at(&insert, 1, exam_ti_ladder[k]);
            status = store_vocabulary_run(&insert, error);
        }
        if (status == MITILOG_OK)
            status = store_link_script(
                writer, "queries/exams/exam_time_at_or_above_refresh_all.sql", error);
    }
    if (status == MITILOG_OK && matches == 0) {
        status = store_link_script(writer, "queries/exams/mode_names_delete.sql", error);
        for (int m = 0; status == MITILOG_OK && m < EXAM_MODE_COUNT; m++) {
            store_query insert;
            store_query_begin(&insert, writer, "queries/exams/mode_name_insert.sql");
            store_bind_integer_at(&insert, 1, m);
            store_bind_text_at(&insert, 2, exam_mode_name((exam_mode)m));
            status = store_vocabulary_run(&insert, error);
        }
    }
    if (status == MITILOG_OK)
        status = store_link_script(writer, "queries/database/write_commit.sql", error);
    if (status != MITILOG_OK) {
        store_link_script(writer, "queries/database/write_rollback.sql", NULL);
        return status;
    }
    if (matches == 0 && !ladder_matches)
        log_info("database %s: TI threshold ladder updated, time at or above recomputed", path);
    return MITILOG_OK;
}
