/*
 * store_write_exam.c - writing one exam record (exams), its timeline
 * (exam_timeline) and per-mode maxima (exam_mode_maxima), replacing what
 * the study had. Runs on the writer connection inside the batch's
 * transaction (store_write.c), so the three are written together.
 */
#include "store/store_internal.h"

#include <math.h>

static int store_exam_bind(store *st, sqlite3_stmt *statement, const store_exam *input)
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
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof texts / sizeof texts[0]; i++)
        rc = store_bind_text_named(st, statement, texts[i].name, texts[i].value);
    const struct {
        const char *name;
        sqlite3_int64 value;
    } integers[] = {
        {":instance_count", (sqlite3_int64)exam->instance_count},
        {":capture_count", (sqlite3_int64)exam->capture_count},
        {":cine_count", (sqlite3_int64)exam->cine_count},
        {":sr_count", (sqlite3_int64)exam->sr_count},
        {":other_count", (sqlite3_int64)exam->other_count},
        {":timed_count", (sqlite3_int64)exam->summary.entry_count},
        {":untimed_count", (sqlite3_int64)exam->summary.untimed_count},
        {":capped_count", (sqlite3_int64)exam->summary.capped_count},
    };
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof integers / sizeof integers[0]; i++)
        rc = store_bind_int_named(st, statement, integers[i].name, integers[i].value);
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
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof reals / sizeof reals[0]; i++)
        rc =
            store_bind_double_named(st, statement, reals[i].name, reals[i].present, reals[i].value);
    /* NOT NULL columns: a non-finite sum must not become NULL silently. */
    for (size_t i = 7; rc == SQLITE_OK && i <= 11; i++)
        if (!isfinite(reals[i].value))
            rc = SQLITE_MISMATCH;
    return rc;
}

static int store_exam_step(sqlite3_stmt *statement, int rc)
{
    if (rc == SQLITE_OK)
        rc = store_step_done(statement) == SQLITE_DONE ? SQLITE_OK : SQLITE_ERROR;
    sqlite3_reset(statement);
    sqlite3_clear_bindings(statement);
    return rc;
}

static int store_exam_children(store *st, const store_exam *input)
{
    const ext_exam *exam = input->exam;
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < exam->summary.entry_count; i++) {
        const ext_timeline_entry *entry = &exam->entries[i];
        size_t instance = exam->capture_instance[entry->capture];
        sqlite3_stmt *statement = st->write.insert_timeline;
        rc = store_bind_text_named(st, statement, ":study_instance_uid", input->study_instance_uid);
        if (rc == SQLITE_OK)
            rc = store_bind_int_named(st, statement, ":position", (sqlite3_int64)i + 1);
        if (rc == SQLITE_OK)
            rc = store_bind_text_named(st, statement, ":sop_instance_uid",
                                       input->instances[instance].sop_instance_uid);
        if (rc == SQLITE_OK)
            rc = store_bind_double_named(st, statement, ":start_seconds", 1, entry->start_seconds);
        if (rc == SQLITE_OK)
            rc = store_bind_double_named(st, statement, ":interval_seconds", 1,
                                         entry->interval_seconds);
        if (rc == SQLITE_OK)
            rc = store_bind_double_named(st, statement, ":cine_seconds", 1, entry->cine_seconds);
        if (rc == SQLITE_OK)
            rc = store_bind_double_named(st, statement, ":attributed_seconds", 1,
                                         entry->attributed_seconds);
        if (rc == SQLITE_OK)
            rc = store_bind_int_named(st, statement, ":capped", entry->capped ? 1 : 0);
        rc = store_exam_step(statement, rc);
    }
    for (int m = 0; rc == SQLITE_OK && m < EXAM_MODE_COUNT; m++) {
        for (int x = 0; rc == SQLITE_OK && x < EXAM_INDEX_COUNT; x++) {
            exam_number maximum = exam->mode_maxima[m][x];
            if (maximum.status != EXAM_VALUE_OK)
                continue;
            sqlite3_stmt *statement = st->write.insert_mode_maximum;
            rc = store_bind_text_named(st, statement, ":study_instance_uid",
                                       input->study_instance_uid);
            if (rc == SQLITE_OK)
                rc = store_bind_text_named(st, statement, ":mode", exam_mode_name((exam_mode)m));
            if (rc == SQLITE_OK)
                rc = store_bind_int_named(st, statement, ":rank", m);
            if (rc == SQLITE_OK)
                rc = store_bind_text_named(st, statement, ":index_name",
                                           exam_index_name((exam_index)x));
            if (rc == SQLITE_OK)
                rc = store_bind_double_named(st, statement, ":max_value", 1, maximum.value);
            rc = store_exam_step(statement, rc);
        }
    }
    return rc;
}

mitilog_status store_write_exam(store *st, const store_exam *input, mitilog_error *error)
{
    sqlite3_stmt *deletes[] = {st->write.delete_timeline, st->write.delete_mode_maxima};
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < 2; i++) {
        rc = sqlite3_bind_text(deletes[i], 1, input->study_instance_uid, -1, SQLITE_STATIC);
        rc = store_exam_step(deletes[i], rc);
    }
    if (rc == SQLITE_OK)
        rc = store_exam_step(st->write.upsert_exam,
                             store_exam_bind(st, st->write.upsert_exam, input));
    if (rc == SQLITE_OK)
        rc = store_exam_children(st, input);
    if (rc != SQLITE_OK)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "exam %s: %s",
                                 input->study_instance_uid,
                                 rc == SQLITE_RANGE ? "bad parameter" : sqlite3_errmsg(st->writer));
    return MITILOG_OK;
}
