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

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "util/hash.h"

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
        int used = vsnprintf(text->data ? text->data + text->length : NULL,
                             text->data ? room : 0, format, arguments);
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

static const char *store_or_empty(const char *text)
{
    return text != NULL ? text : "";
}

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
    store_text_add(&text, "v=%s\nstudy=%s\nrule=%s\nperiod=%s\ntype=%s\nroom=%s\npreset=%s\n"
                   "shift=%s\ntransducer=%s\nage=%s\nclosed=%d\n",
                   store_or_empty(e->policy_version), store_or_empty(e->study_instance_uid),
                   store_or_empty(e->rule_id), store_or_empty(e->period),
                   store_or_empty(e->exam_type), store_or_empty(e->room),
                   store_or_empty(e->preset), store_or_empty(e->shift),
                   store_or_empty(e->transducer), store_or_empty(e->age_group), e->closed);
    const exam_measurements none = {0}, *m = e->measurements != NULL ? e->measurements : &none;
    exam_index governing = m->governing_index;
    store_text_add(&text, "m=%s|%d:%.17g|%d:%.17g|%.17g|%.17g|%.17g",
                   e->measurements != NULL ? exam_index_name(governing) : "",
                   m->index_reported[governing], m->max_index[governing],
                   m->index_reported[EXAM_INDEX_MI], m->max_index[EXAM_INDEX_MI],
                   m->cem43_minutes, m->estimated_seconds, m->doppler_seconds);
    for (int i = 0; i < EXAM_TI_STEP_COUNT; i++)
        store_text_add(&text, "|%.17g", m->seconds_at_or_above[i]);
    for (size_t i = 0; i < e->finding_count; i++) {
        const exam_finding *f = &e->findings[i];
        store_text_add(&text, "\nf=%s|%s|%s|%s|%.17g|%d:%.17g|%.17g|%s|%d:%.17g:%.17g|%.17g|%s|"
                       "%s|%d|%s|%s|",
                       f->rule_id, exam_severity_name(f->severity),
                       store_or_empty(f->quantity), store_or_empty(f->unit), f->measured,
                       f->has_limit, f->limit, f->threshold,
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

/* One entry of the policy's limits (policy_limits_append.sql) and its
 * dwell table (policy_dwell_step_append.sql), entry number index. */
static int store_write_limits(store *st, sqlite3_stmt *limits, sqlite3_stmt *step, const char *version,
                              size_t index, const exam_limits *l)
{
    int rc = store_bind_text_named(st, limits, ":version", version);
    if (rc == SQLITE_OK) rc = store_bind_text_named(st, limits, ":group", exam_group_name(l->group));
    if (rc == SQLITE_OK) rc = store_bind_text_named(st, limits, ":age_group", l->age_group);
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, limits, ":ti_ceiling", l->has_ti_ceiling, l->ti_ceiling);
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, limits, ":mi_ceiling", l->has_mi_ceiling, l->mi_ceiling);
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, limits, ":mi_equipment", l->has_mi_equipment,
                                     l->mi_equipment);
    if (rc == SQLITE_OK)
        rc = store_bind_double_named(st, limits, ":ti_equipment", l->has_ti_equipment,
                                     l->ti_equipment);
    if (rc == SQLITE_OK) rc = store_bind_text_named(st, limits, ":dwell_rule", l->dwell_rule);
    rc = store_run(limits, rc);
    for (size_t k = 0; rc == SQLITE_OK && k < l->dwell_count; k++) {
        const exam_dwell_step *d = &l->dwell[k];
        rc = store_bind_text_named(st, step, ":version", version);
        if (rc == SQLITE_OK) rc = store_bind_int_named(st, step, ":index", (sqlite3_int64)index);
        if (rc == SQLITE_OK) rc = store_bind_double_named(st, step, ":threshold", 1, d->threshold);
        if (rc == SQLITE_OK)
            rc = store_bind_double_named(st, step, ":minutes", !d->not_recommended, d->minutes);
        if (rc == SQLITE_OK)
            rc = store_bind_int_named(st, step, ":not_recommended", d->not_recommended != 0);
        rc = store_run(step, rc);
    }
    return rc;
}

mitilog_status store_write_policy(store *st, const store_policy *policy, mitilog_error *error)
{
    store_statements set = {0};
    sqlite3_stmt *upsert = store_statement(st, &set, "queries/policy_upsert.sql", error);
    sqlite3_stmt *rule = store_statement(st, &set, "queries/policy_rule_append.sql", error);
    sqlite3_stmt *setting = store_statement(st, &set, "queries/policy_setting_set.sql", error);
    sqlite3_stmt *limits = store_statement(st, &set, "queries/policy_limits_append.sql", error);
    sqlite3_stmt *step = store_statement(st, &set, "queries/policy_dwell_step_append.sql", error);
    if (upsert == NULL || rule == NULL || setting == NULL || limits == NULL || step == NULL) {
        store_statements_finalize(&set);
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
    rc = store_run(upsert, rc);
    for (size_t r = 0; rc == SQLITE_OK && r < policy->rule_count; r++) {
        const exam_rule_info *info = &policy->rules[r];
        rc = store_bind_text_named(st, rule, ":version", policy->version);
        if (rc == SQLITE_OK) rc = store_bind_text_named(st, rule, ":id", info->id);
        if (rc == SQLITE_OK) rc = store_bind_text_named(st, rule, ":kind", info->kind);
        if (rc == SQLITE_OK)
            rc = store_bind_text_named(st, rule, ":severity", exam_severity_name(info->severity));
        if (rc == SQLITE_OK) rc = store_bind_int_named(st, rule, ":enabled", info->enabled != 0);
        if (rc == SQLITE_OK) rc = store_bind_text_named(st, rule, ":source", info->source);
        if (rc == SQLITE_OK)
            rc = store_bind_text_named(st, rule, ":description", info->description);
        rc = store_run(rule, rc);
        for (size_t k = 0; rc == SQLITE_OK && k < info->setting_count; k++) {
            rc = store_bind_text_named(st, setting, ":version", policy->version);
            if (rc == SQLITE_OK)
                rc = store_bind_int_named(st, setting, ":rule_index", (sqlite3_int64)r);
            if (rc == SQLITE_OK)
                rc = store_bind_text_named(st, setting, ":key", info->settings[k].key);
            if (rc == SQLITE_OK)
                rc = store_bind_text_named(st, setting, ":value", info->settings[k].value);
            rc = store_run(setting, rc);
        }
    }
    for (size_t k = 0; rc == SQLITE_OK && k < policy->limit_count; k++)
        rc = store_write_limits(st, limits, step, policy->version, k, &policy->limits[k]);
    mitilog_status status = MITILOG_OK;
    if (rc != SQLITE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "policy %s: %s",
                                   policy->version, sqlite3_errmsg(st->writer));
    store_statements_finalize(&set);
    return status;
}

/* Builds a finding's instance_uids JSON array with SQLite (malloc'ed). */
static int store_uids_json(sqlite3_stmt *append, const exam_finding *finding, char **out)
{
    char *array = strdup("[]");
    int rc = array != NULL ? SQLITE_OK : SQLITE_NOMEM;
    for (size_t i = 0; rc == SQLITE_OK && i < finding->instance_count; i++) {
        rc = sqlite3_bind_text(append, 1, array, -1, SQLITE_TRANSIENT);
        if (rc == SQLITE_OK)
            rc = sqlite3_bind_text(append, 2, finding->instance_uids[i], -1, SQLITE_STATIC);
        if (rc == SQLITE_OK && sqlite3_step(append) == SQLITE_ROW &&
            sqlite3_column_text(append, 0) != NULL) {
            char *next = strdup((const char *)sqlite3_column_text(append, 0));
            free(array);
            array = next;
            rc = array != NULL ? SQLITE_OK : SQLITE_NOMEM;
        } else if (rc == SQLITE_OK) {
            rc = SQLITE_ERROR;
        }
        sqlite3_reset(append);
        sqlite3_clear_bindings(append);
    }
    if (rc != SQLITE_OK) {
        free(array);
        array = NULL;
    }
    *out = array;
    return rc;
}

static int store_insert_finding(store *st, sqlite3_stmt *insert, sqlite3_stmt *append,
                                const store_evaluation *e, const exam_finding *f)
{
    char *uids = NULL;
    int rc = store_uids_json(append, f, &uids);
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
        {":transducer", store_finding_transducer(f) != NULL ? store_finding_transducer(f)
                                                            : e->transducer},
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
        {":study_instance_uid", e->study_instance_uid}, {":room", e->room},
        {":preset", e->preset}, {":shift", e->shift}, {":transducer", e->transducer},
        {":age_group", e->age_group}, {":last_received_at", e->last_received_at},
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
    if (rc == SQLITE_OK) rc = store_bind_text_named(st, statement, ":policy_version", e->policy_version);
    const exam_measurements *m = e->measurements;
    exam_index governing = m->governing_index;
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, statement, ":governing_index", exam_index_name(governing));
    if (rc == SQLITE_OK) rc = store_bind_text_named(st, statement, ":evaluation_hash", hash);
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
        rc = store_bind_double_named(st, statement, reals[i].name, reals[i].present,
                                     reals[i].value);
    return store_run(statement, rc);
}

/* The evaluation's time at or above each threshold of the TI ladder, as
 * rows (after its measurements row, which they refer to). */
static int store_write_time_at_or_above(store *st, sqlite3_stmt *removal, sqlite3_stmt *insert,
                                        const store_evaluation *e)
{
    int rc = store_bind_text_named(st, removal, ":study_instance_uid", e->study_instance_uid);
    if (rc == SQLITE_OK) rc = store_bind_text_named(st, removal, ":policy_version", e->policy_version);
    rc = store_run(removal, rc);
    for (int k = 0; rc == SQLITE_OK && k < EXAM_TI_STEP_COUNT; k++) {
        rc = store_bind_text_named(st, insert, ":study_instance_uid", e->study_instance_uid);
        if (rc == SQLITE_OK) rc = store_bind_text_named(st, insert, ":policy_version", e->policy_version);
        if (rc == SQLITE_OK) rc = store_bind_double_named(st, insert, ":threshold", 1, exam_ti_ladder[k]);
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
    sqlite3_stmt *ensure = store_statement(st, &set, "queries/policy_ensure.sql", error);
    sqlite3_stmt *stored = store_statement(st, &set,
                                           exam ? "queries/evaluation_hash_exam.sql"
                                                : "queries/evaluation_hash_device.sql",
                                           error);
    sqlite3_stmt *context = exam ? store_statement(st, &set, "queries/exam_context_upsert.sql",
                                                   error)
                                 : NULL;
    sqlite3_stmt *removal = store_statement(st, &set, "queries/findings_delete.sql", error);
    sqlite3_stmt *supersede = store_statement(st, &set, "queries/findings_supersede.sql", error);
    sqlite3_stmt *insert = store_statement(st, &set, "queries/finding_insert.sql", error);
    sqlite3_stmt *append = store_statement(st, &set, "queries/json_array_append.sql", error);
    sqlite3_stmt *values = store_statement(st, &set,
                                           exam ? "queries/exam_measurements_upsert.sql"
                                                : "queries/device_evaluation_upsert.sql",
                                           error);
    sqlite3_stmt *times_removal =
        exam ? store_statement(st, &set, "queries/measurement_time_at_or_above_delete.sql", error)
             : NULL;
    sqlite3_stmt *times_insert =
        exam ? store_statement(st, &set, "queries/measurement_time_at_or_above_insert.sql", error)
             : NULL;
    if (ensure == NULL || stored == NULL || (exam && context == NULL) || removal == NULL ||
        supersede == NULL || insert == NULL || append == NULL || values == NULL ||
        (exam && (times_removal == NULL || times_insert == NULL))) {
        store_statements_finalize(&set);
        return MITILOG_ERROR_DATABASE;
    }
    int rc = store_bind_text_named(st, ensure, ":version", e->policy_version);
    if (rc == SQLITE_OK) rc = store_bind_text_named(st, ensure, ":name", e->policy_name);
    if (rc == SQLITE_OK)
        rc = store_bind_text_named(st, ensure, ":normalised_text",
                                   store_or_empty(e->normalised_text));
    rc = store_run(ensure, rc);
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
            rc = store_insert_finding(st, insert, append, e, &e->findings[i]);
            written++;
        }
        if (rc == SQLITE_OK && exam) {
            rc = store_write_measurements(st, values, e, hash);
            if (rc == SQLITE_OK)
                rc = store_write_time_at_or_above(st, times_removal, times_insert, e);
        } else if (rc == SQLITE_OK) {
            rc = store_bind_text_named(st, values, ":rule_id", e->rule_id);
            if (rc == SQLITE_OK)
                rc = store_bind_text_named(st, values, ":policy_version", e->policy_version);
            if (rc == SQLITE_OK) rc = store_bind_text_named(st, values, ":period", e->period);
            if (rc == SQLITE_OK) rc = store_bind_text_named(st, values, ":evaluation_hash", hash);
            rc = store_run(values, rc);
        }
    }
    mitilog_status status = MITILOG_OK;
    if (rc != SQLITE_OK) {
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "evaluation of %s: %s",
                                   exam ? e->study_instance_uid : e->period,
                                   rc == SQLITE_RANGE ? "bad parameter"
                                                      : sqlite3_errmsg(st->writer));
    } else {
        counts->evaluations++;
        counts->unchanged += unchanged ? 1 : 0;
        counts->written += written;
        counts->superseded += superseded;
    }
    store_statements_finalize(&set);
    return status;
}
