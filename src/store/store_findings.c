/*
 * store_findings.c - the write side of the ALARA policy engine's output:
 * registering a policy (policies, rules described as JSON by SQLite) and
 * one evaluation (findings, exam_context, exam_measurements or
 * device_evaluations) in one transaction. Runs on the writer connection
 * inside the batch's transaction (store_write.c). Statements are prepared
 * per call: evaluations are rare next to instance writes.
 *
 * Idempotence: an evaluation's content (every finding field but
 * evaluated_at, provisional flags, measurements) is hashed; when the
 * stored hash for the exam (or rule and period) under the same version is
 * equal and no finding of another version is left to supersede, nothing
 * is written. So rescoring twice leaves the tables byte-identical, ids
 * and evaluated_at included.
 */
#include "store/store_internal.h"
#include "store/store_notifications.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "util/hash.h"
#include "json/json.h"

typedef struct store_text {
    char *data;
    size_t length, capacity;
    int failed;
} store_text;

static void store_text_add(store_text *text, const char *format, ...)
    __attribute__((format(printf, 2, 3)));

static void store_text_add(store_text *text, const char *format, ...)
{
    if (text->failed)
        return;
    for (;;) {
        va_list arguments;
        va_start(arguments, format);
        size_t room = text->capacity - text->length;
        int used = vsnprintf(text->data ? text->data + text->length : NULL, text->data ? room : 0,
                             format, arguments);
        va_end(arguments);
        if (used < 0) {
            text->failed = 1;
            return;
        }
        if (text->data != NULL && (size_t)used < room) {
            text->length += (size_t)used;
            return;
        }
        size_t grown = text->capacity * 2 + (size_t)used + 256;
        char *data = realloc(text->data, grown);
        if (data == NULL) {
            text->failed = 1;
            return;
        }
        text->data = data;
        text->capacity = grown;
    }
}

static const char *store_or_empty(const char *text) { return text != NULL ? text : ""; }

/* The room and transducer of a device-level finding (an exam's findings
 * take the evaluation's). */
static const char *store_finding_room(const exam_finding *f)
{
    return f->study_instance_uid == NULL ? f->room : NULL;
}

static const char *store_finding_transducer(const exam_finding *f)
{
    return f->study_instance_uid == NULL ? f->transducer : NULL;
}

static const char *store_finding_index(const exam_finding *f)
{
    return f->has_index ? exam_index_name(f->index) : NULL;
}

/* The canonical text an evaluation's hash is computed from. */
static int store_evaluation_hash(const store_evaluation *e, char out[HASH_HEX_SIZE])
{
    store_text text = {0};
    store_text_add(&text,
                   "v=%s\nstudy=%s\nrule=%s\nperiod=%s\ntype=%s\nroom=%s\npreset=%s\n"
                   "shift=%s\ntransducer=%s\nage=%s\nclosed=%d\n",
                   store_or_empty(e->policy_version), store_or_empty(e->study_instance_uid),
                   store_or_empty(e->rule_id), store_or_empty(e->period),
                   store_or_empty(e->exam_type), store_or_empty(e->room), store_or_empty(e->preset),
                   store_or_empty(e->shift), store_or_empty(e->transducer),
                   store_or_empty(e->age_group), e->closed);
    const exam_measurements none = {0}, *m = e->measurements != NULL ? e->measurements : &none;
    exam_index governing = m->governing_index;
    store_text_add(&text, "m=%s|%d:%.17g|%d:%.17g|%.17g|%.17g|%.17g",
                   e->measurements != NULL ? exam_index_name(governing) : "",
                   m->index_reported[governing], m->max_index[governing],
                   m->index_reported[EXAM_INDEX_MI], m->max_index[EXAM_INDEX_MI], m->cem43_minutes,
                   m->estimated_seconds, m->doppler_seconds);
    for (int i = 0; i < EXAM_TI_STEP_COUNT; i++)
        store_text_add(&text, "|%.17g", m->seconds_at_or_above[i]);
    for (size_t i = 0; i < e->finding_count; i++) {
        const exam_finding *f = &e->findings[i];
        store_text_add(&text,
                       "\nf=%s|%s|%s|%s|%.17g|%d:%.17g|%.17g|%s|%d:%.17g:%.17g|%.17g|%s|"
                       "%s|%d|%s|%s|",
                       f->rule_id, exam_severity_name(f->severity), store_or_empty(f->quantity),
                       store_or_empty(f->unit), f->measured, f->has_limit, f->limit, f->threshold,
                       store_or_empty(store_finding_index(f)), f->has_span, f->first_seconds,
                       f->last_seconds, f->estimated_seconds, store_or_empty(f->assumptions),
                       store_or_empty(f->source), f->provisional,
                       store_or_empty(store_finding_room(f)),
                       store_or_empty(store_finding_transducer(f)));
        for (size_t k = 0; k < f->instance_count; k++)
            store_text_add(&text, "%s,", f->instance_uids[k]);
    }
    int rc = -1;
    if (!text.failed && text.data != NULL && hash_text_hex(text.data, out) == MITILOG_OK)
        rc = 0;
    free(text.data);
    return rc;
}

/* The cached statements of one call, released together. */
enum { STORE_FINDINGS_STATEMENTS = 12 };
typedef struct store_statements {
    sqlite3_stmt *list[STORE_FINDINGS_STATEMENTS];
    size_t count;
} store_statements;

static sqlite3_stmt *store_statement(store *st, store_statements *set, const char *name,
                                     mitilog_error *error)
{
    sqlite3_stmt *statement = NULL;
    if (set->count == STORE_FINDINGS_STATEMENTS ||
        store_cached_statement(&st->writer_cache, st->writer, name, &statement, error) !=
            MITILOG_OK)
        return NULL;
    set->list[set->count++] = statement;
    return statement;
}

static void store_statements_finalize(store_statements *set)
{
    for (size_t i = 0; i < set->count; i++)
        store_release(set->list[i]);
    set->count = 0;
}

/* Steps to done, resets, clears the bindings. */
static int store_run(sqlite3_stmt *statement, int rc)
{
    if (rc == SQLITE_OK)
        rc = store_step_done(statement) == SQLITE_DONE ? SQLITE_OK : SQLITE_ERROR;
    sqlite3_reset(statement);
    sqlite3_clear_bindings(statement);
    return rc;
}

/* Runs statement, which may add a policy row (policy_upsert.sql,
 * policy_ensure.sql); when it did, the new row is the current policy and
 * every exam summary takes that policy's measurement
 * (exam_summary_policy_refresh.sql). An update of an existing row leaves
 * the current policy as it was, so nothing more is run. */
static int store_run_policy_row(sqlite3 *db, sqlite3_stmt *statement, sqlite3_stmt *refresh, int rc)
{
    if (rc != SQLITE_OK)
        return store_run(statement, rc);
    /* an upsert's update and a DO NOTHING leave the last rowid alone */
    sqlite3_set_last_insert_rowid(db, 0);
    rc = store_run(statement, rc);
    if (rc == SQLITE_OK && sqlite3_last_insert_rowid(db) != 0)
        rc = store_run(refresh, rc);
    return rc;
}

/* The policy's rules as GET /api/v1/policy shows them: one object per
 * rule in policy order with its settings by key (a key given twice keeps
 * its first place and its last value). */
static void store_rules_json(json_writer *w, const store_policy *policy)
{
    json_array_begin(w);
    for (size_t r = 0; r < policy->rule_count; r++) {
        const exam_rule_info *info = &policy->rules[r];
        json_object_begin(w);
        json_key(w, "id");
        json_string(w, info->id);
        json_key(w, "kind");
        json_string(w, info->kind);
        json_key(w, "severity");
        json_string(w, exam_severity_name(info->severity));
        json_key(w, "enabled");
        json_boolean(w, info->enabled);
        json_key(w, "source");
        json_string(w, info->source);
        json_key(w, "description");
        json_string(w, info->description);
        json_key(w, "settings");
        json_object_begin(w);
        for (size_t k = 0; k < info->setting_count; k++) {
            const char *key = info->settings[k].key != NULL ? info->settings[k].key : "";
            int earlier = 0;
            for (size_t j = 0; j < k && !earlier; j++)
                earlier = info->settings[j].key != NULL && strcmp(info->settings[j].key, key) == 0;
            if (earlier)
                continue;
            size_t last = k;
            for (size_t j = k + 1; j < info->setting_count; j++)
                if (info->settings[j].key != NULL && strcmp(info->settings[j].key, key) == 0)
                    last = j;
            json_key(w, key);
            json_string(w, info->settings[last].value);
        }
        json_object_end(w);
        json_object_end(w);
    }
    json_array_end(w);
}

/* What the policy sets per group and age group, with each dwell table
 * (the limits the dashboard draws). */
static void store_limits_json(json_writer *w, const store_policy *policy)
{
    json_array_begin(w);
    for (size_t k = 0; k < policy->limit_count; k++) {
        const exam_limits *l = &policy->limits[k];
        json_object_begin(w);
        json_key(w, "group");
        json_string(w, exam_group_name(l->group));
        json_key(w, "age_group");
        json_string(w, l->age_group);
        json_key(w, "ti_ceiling");
        json_number(w, l->has_ti_ceiling, l->ti_ceiling);
        json_key(w, "mi_ceiling");
        json_number(w, l->has_mi_ceiling, l->mi_ceiling);
        json_key(w, "mi_equipment");
        json_number(w, l->has_mi_equipment, l->mi_equipment);
        json_key(w, "ti_equipment");
        json_number(w, l->has_ti_equipment, l->ti_equipment);
        json_key(w, "dwell_rule");
        json_string(w, l->dwell_rule);
        json_key(w, "dwell");
        json_array_begin(w);
        for (size_t d = 0; d < l->dwell_count; d++) {
            const exam_dwell_step *step = &l->dwell[d];
            json_object_begin(w);
            json_key(w, "threshold");
            json_number(w, 1, step->threshold);
            json_key(w, "minutes");
            json_number(w, !step->not_recommended, step->minutes);
            json_key(w, "not_recommended");
            json_boolean(w, step->not_recommended);
            json_object_end(w);
        }
        json_array_end(w);
        json_object_end(w);
    }
    json_array_end(w);
}

mitilog_status store_write_policy(store *st, const store_policy *policy, mitilog_error *error)
{
    char *rules_json = NULL, *limits_json = NULL;
    json_writer writer;
    json_writer_init(&writer);
    store_rules_json(&writer, policy);
    mitilog_status status = json_writer_take(&writer, &rules_json, error);
    if (status == MITILOG_OK) {
        json_writer_init(&writer);
        store_limits_json(&writer, policy);
        status = json_writer_take(&writer, &limits_json, error);
    }
    if (status != MITILOG_OK) {
        free(rules_json);
        return status;
    }
    store_statements set = {0};
    sqlite3_stmt *upsert = store_statement(st, &set, "queries/findings/policy_upsert.sql", error);
    sqlite3_stmt *refresh =
        store_statement(st, &set, "queries/exams/exam_summary_policy_refresh.sql", error);
    if (upsert == NULL || refresh == NULL) {
        store_statements_finalize(&set);
        free(rules_json);
        free(limits_json);
        return MITILOG_ERROR_DATABASE;
    }
    int rc = store_bind_text_named(st, upsert, ":version", policy->version);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, upsert, ":name", policy->name);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, upsert, ":normalised_text",
                                   store_or_empty(policy->normalised_text));
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, upsert, ":closed_after_idle_minutes", 1,
                                     policy->closed_after_idle_minutes);
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, upsert, ":gap_cap_seconds", 1, policy->gap_cap_seconds);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, upsert, ":rules_json", rules_json);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, upsert, ":limits_json", limits_json);
    rc = store_run_policy_row(st->writer, upsert, refresh, rc);
    if (rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "policy %s: %s", policy->version,
                                   sqlite3_errmsg(st->writer));
    store_statements_finalize(&set);
    free(rules_json);
    free(limits_json);
    return status;
}

/* A finding's instance_uids as a JSON array (malloc'ed); a NULL UID is
 * null. */
static int store_uids_json(const exam_finding *finding, char **out)
{
    json_writer writer;
    json_writer_init(&writer);
    json_array_begin(&writer);
    for (size_t i = 0; i < finding->instance_count; i++)
        json_string(&writer, finding->instance_uids[i]);
    json_array_end(&writer);
    mitilog_status status = json_writer_take(&writer, out, NULL);
    return status == MITILOG_OK ? SQLITE_OK : SQLITE_NOMEM;
}

static int store_insert_finding(store *st, sqlite3_stmt *insert, const store_evaluation *e,
                                const exam_finding *f)
{
    char *uids = NULL;
    int rc = store_uids_json(f, &uids);
    const struct {
        const char *name;
        const char *value;
    } texts[] = {
        {":study_instance_uid", e->study_instance_uid},
        {":rule_id", f->rule_id},
        {":severity", exam_severity_name(f->severity)},
        {":quantity", f->quantity},
        {":unit", f->unit},
        {":governing_index", store_finding_index(f)},
        {":instance_uids", uids},
        {":assumptions", f->assumptions},
        {":source_text", f->source},
        {":policy_version", e->policy_version},
        {":exam_type", e->exam_type},
        {":room", store_finding_room(f) != NULL ? store_finding_room(f) : e->room},
        {":preset", e->preset},
        {":shift", e->shift},
        {":transducer",
         store_finding_transducer(f) != NULL ? store_finding_transducer(f) : e->transducer},
        {":period", e->study_instance_uid == NULL ? e->period : NULL},
    };
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof texts / sizeof texts[0]; i++)
        rc = store_bind_text_named(st, insert, texts[i].name, texts[i].value);
    const struct {
        const char *name;
        int present;
        double value;
    } reals[] = {
        {":measured_value", 1, f->measured},
        {":limit_value", f->has_limit, f->limit},
        {":threshold", f->threshold != 0, f->threshold},
        {":first_seconds", f->has_span, f->first_seconds},
        {":last_seconds", f->has_span, f->last_seconds},
        {":estimated_seconds", 1, f->estimated_seconds},
    };
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof reals / sizeof reals[0]; i++)
        rc = store_bind_double_named(st, insert, reals[i].name, reals[i].present, reals[i].value);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, insert, ":provisional", f->provisional != 0);
    rc = store_run(insert, rc);
    free(uids);
    return rc;
}

static int store_bind_scope(sqlite3_stmt *statement, const store_evaluation *e)
{
    int rc = e->study_instance_uid != NULL
                 ? sqlite3_bind_text(statement, 1, e->study_instance_uid, -1, SQLITE_STATIC)
                 : sqlite3_bind_null(statement, 1);
    if (rc == SQLITE_OK)
        rc = sqlite3_bind_text(statement, 2, e->policy_version, -1, SQLITE_STATIC);
    if (rc == SQLITE_OK && sqlite3_bind_parameter_count(statement) >= 4) {
        rc = sqlite3_bind_text(statement, 3, store_or_empty(e->rule_id), -1, SQLITE_STATIC);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_text(statement, 4, store_or_empty(e->period), -1, SQLITE_STATIC);
    }
    return rc;
}

static int store_write_context_row(store *st, sqlite3_stmt *statement, const store_evaluation *e)
{
    const struct {
        const char *name;
        const char *value;
    } texts[] = {
        {":study_instance_uid", e->study_instance_uid},
        {":room", e->room},
        {":preset", e->preset},
        {":shift", e->shift},
        {":transducer", e->transducer},
        {":age_group", e->age_group},
        {":last_received_at", e->last_received_at},
    };
    int rc = SQLITE_OK;
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof texts / sizeof texts[0]; i++)
        rc = store_bind_text_named(st, statement, texts[i].name, texts[i].value);
    if (rc == SQLITE_OK)
        rc = store_bind_int_named(st, statement, ":closed", e->closed != 0);
    return store_run(statement, rc);
}

static int store_write_measurements(store *st, sqlite3_stmt *statement, const store_evaluation *e,
                                    const char *hash)
{
    int rc = store_bind_text_named(st, statement, ":study_instance_uid", e->study_instance_uid);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":policy_version", e->policy_version);
    const exam_measurements *m = e->measurements;
    exam_index governing = m->governing_index;
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":governing_index", exam_index_name(governing));
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":evaluation_hash", hash);
    const struct {
        const char *name;
        int present;
        double value;
    } reals[] = {
        {":max_governing", m->index_reported[governing], m->max_index[governing]},
        {":max_mi", m->index_reported[EXAM_INDEX_MI], m->max_index[EXAM_INDEX_MI]},
        {":cem43_minutes", 1, m->cem43_minutes},
        {":estimated_seconds", 1, m->estimated_seconds},
        {":doppler_seconds", 1, m->doppler_seconds},
    };
    for (size_t i = 0; rc == SQLITE_OK && i < sizeof reals / sizeof reals[0]; i++)
        rc =
            store_bind_double_named(st, statement, reals[i].name, reals[i].present, reals[i].value);
    return store_run(statement, rc);
}

/* The evaluation's time at or above each threshold of the TI ladder, as
 * rows (after its measurements row, which they refer to). */
static int store_write_time_at_or_above(store *st, sqlite3_stmt *removal, sqlite3_stmt *insert,
                                        const store_evaluation *e)
{
    int rc = store_bind_text_named(st, removal, ":study_instance_uid", e->study_instance_uid);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, removal, ":policy_version", e->policy_version);
    rc = store_run(removal, rc);
    for (int k = 0; rc == SQLITE_OK && k < EXAM_TI_STEP_COUNT; k++) {
        rc = store_bind_text_named(st, insert, ":study_instance_uid", e->study_instance_uid);
        if (rc == SQLITE_OK)
            rc = store_bind_text_named(st, insert, ":policy_version", e->policy_version);
        if (rc == SQLITE_OK)
            rc = store_bind_double_named(st, insert, ":threshold", 1, exam_ti_ladder[k]);
        if (rc == SQLITE_OK)
            rc = store_bind_double_named(st, insert, ":seconds", 1,
                                         e->measurements->seconds_at_or_above[k]);
        rc = store_run(insert, rc);
    }
    return rc;
}

mitilog_status store_write_evaluation(store *st, const store_evaluation *e,
                                      store_evaluation_counts *counts, mitilog_error *error)
{
    int exam = e->study_instance_uid != NULL;
    if (!exam && (e->rule_id == NULL || e->period == NULL))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "device-level evaluation without rule or period");
    char hash[HASH_HEX_SIZE];
    if (store_evaluation_hash(e, hash) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "evaluation: out of memory");
    store_statements set = {0};
    sqlite3_stmt *ensure = store_statement(st, &set, "queries/findings/policy_ensure.sql", error);
    sqlite3_stmt *refresh =
        store_statement(st, &set, "queries/exams/exam_summary_policy_refresh.sql", error);
    sqlite3_stmt *stored = store_statement(st, &set,
                                           exam ? "queries/findings/evaluation_hash_exam.sql"
                                                : "queries/findings/evaluation_hash_device.sql",
                                           error);
    sqlite3_stmt *context =
        exam ? store_statement(st, &set, "queries/exams/exam_context_upsert.sql", error) : NULL;
    sqlite3_stmt *removal =
        store_statement(st, &set, "queries/findings/findings_delete.sql", error);
    sqlite3_stmt *supersede =
        store_statement(st, &set, "queries/findings/findings_supersede.sql", error);
    sqlite3_stmt *insert = store_statement(st, &set, "queries/findings/finding_insert.sql", error);
    sqlite3_stmt *values = store_statement(st, &set,
                                           exam ? "queries/findings/exam_measurements_upsert.sql"
                                                : "queries/findings/device_evaluation_upsert.sql",
                                           error);
    sqlite3_stmt *times_removal =
        exam ? store_statement(st, &set, "queries/findings/measurement_time_at_or_above_delete.sql",
                               error)
             : NULL;
    sqlite3_stmt *times_insert =
        exam ? store_statement(st, &set, "queries/findings/measurement_time_at_or_above_insert.sql",
                               error)
             : NULL;
    if (ensure == NULL || refresh == NULL || stored == NULL || (exam && context == NULL) ||
        removal == NULL || supersede == NULL || insert == NULL || values == NULL ||
        (exam && (times_removal == NULL || times_insert == NULL))) {
        store_statements_finalize(&set);
        return MITILOG_ERROR_DATABASE;
    }
    int rc = store_bind_text_named(st, ensure, ":version", e->policy_version);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, ensure, ":name", e->policy_name);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, ensure, ":normalised_text",
                                   store_or_empty(e->normalised_text));
    rc = store_run_policy_row(st->writer, ensure, refresh, rc);
    if (rc == SQLITE_OK && exam)
        rc = store_write_context_row(st, context, e);
    /* Unchanged? */
    int unchanged = 0;
    if (rc == SQLITE_OK) {
        rc = sqlite3_bind_text(stored, 1, exam ? e->study_instance_uid : e->rule_id, -1,
                               SQLITE_STATIC);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_text(stored, 2, e->policy_version, -1, SQLITE_STATIC);
        if (rc == SQLITE_OK && !exam)
            rc = sqlite3_bind_text(stored, 3, e->period, -1, SQLITE_STATIC);
        if (rc == SQLITE_OK) {
            if (sqlite3_step(stored) == SQLITE_ROW) {
                const unsigned char *previous = sqlite3_column_text(stored, 0);
                unchanged = previous != NULL && strcmp((const char *)previous, hash) == 0 &&
                            sqlite3_column_int64(stored, 1) == 0;
            } else {
                rc = SQLITE_ERROR;
            }
        }
        sqlite3_reset(stored);
        sqlite3_clear_bindings(stored);
    }
    unsigned long written = 0, superseded = 0;
    if (rc == SQLITE_OK && !unchanged) {
        rc = store_run(removal, store_bind_scope(removal, e));
        if (rc == SQLITE_OK) {
            rc = store_run(supersede, store_bind_scope(supersede, e));
            superseded = (unsigned long)sqlite3_changes(st->writer);
        }
        for (size_t i = 0; rc == SQLITE_OK && i < e->finding_count; i++) {
            rc = store_insert_finding(st, insert, e, &e->findings[i]);
            written++;
        }
        /* Findings to notify, in the same transaction (the outbox). */
        if (rc == SQLITE_OK && e->finding_count > 0)
            rc = store_notifications_enqueue(st, e);
        if (rc == SQLITE_OK && exam) {
            rc = store_write_measurements(st, values, e, hash);
            if (rc == SQLITE_OK)
                rc = store_write_time_at_or_above(st, times_removal, times_insert, e);
        } else if (rc == SQLITE_OK) {
            rc = store_bind_text_named(st, values, ":rule_id", e->rule_id);
            if (rc == SQLITE_OK)
                rc = store_bind_text_named(st, values, ":policy_version", e->policy_version);
            if (rc == SQLITE_OK)
                rc = store_bind_text_named(st, values, ":period", e->period);
            if (rc == SQLITE_OK)
                rc = store_bind_text_named(st, values, ":evaluation_hash", hash);
            rc = store_run(values, rc);
        }
    }
    mitilog_status status = MITILOG_OK;
    if (rc != SQLITE_OK) {
        status =
            mitilog_error_set(error, MITILOG_ERROR_DATABASE, "evaluation of %s: %s",
                              exam ? e->study_instance_uid : e->period,
                              rc == SQLITE_RANGE ? "bad parameter" : sqlite3_errmsg(st->writer));
    } else {
        counts->evaluations++;
        counts->unchanged += unchanged ? 1 : 0;
        counts->written += written;
        counts->superseded += superseded;
    }
    store_statements_finalize(&set);
    return status;
}
