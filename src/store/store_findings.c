/*
 * store_findings.c - ALARA policy and findings in the store
 * (store_findings.h): registering a policy (policies, rules described as
 * JSON), one evaluation (findings, exam_context, exam_measurements or
 * device_evaluations) in one group-commit request, what an evaluation
 * reads (a study's context and days, the instances of a day) and the
 * JSON of GET /api/v1/findings and /api/v1/policy. SQL:
 * sql/queries/findings/.
 *
 * Idempotence: an evaluation's content (every finding field but
 * evaluated_at, provisional flags, measurements) is hashed; when the
 * stored hash for the exam (or rule and period) under the same version is
 * equal and no finding of another version is left to supersede, nothing
 * is written. So rescoring twice leaves the tables byte-identical, ids
 * and evaluated_at included.
 */
#include "store/store_findings.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "extract/ext_timeline.h"
#include "json/json.h"
#include "store/store_internal.h"
#include "util/hash.h"

enum { STORE_FINDINGS_LIMIT_DEFAULT = 1000, STORE_FINDINGS_LIMIT_MAX = 10000 };

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

/* Runs a bound writer query to its end; 0 when it succeeded (else the
 * query holds the reason). */
static int store_run(store_query *query)
{
    store_query_run(query);
    return store_query_end(query) == MITILOG_OK ? 0 : -1;
}

/* Runs the bound policy_upsert.sql or policy_ensure.sql in query, which
 * may add the row of version; when it did, the new row is the current
 * policy and every exam summary takes that policy's measurement
 * (exam_summary_policy_refresh.sql). An update of an existing row leaves
 * the current policy as it was, so nothing more is run. other is room for
 * the statements around it; on failure query holds the reason. */
static int store_run_policy_row(store_link *writer, const char *version, store_query *query,
                                store_query *other)
{
    store_query_begin(other, writer, "queries/findings/policy_exists.sql");
    store_bind_text_at(other, 1, version);
    int held = store_query_step(other) && store_column_integer(other, 0) > 0;
    if (store_query_end(other) != MITILOG_OK) {
        store_query_end(query);
        *query = *other;
        return -1;
    }
    if (store_run(query) != 0)
        return -1;
    if (held)
        return 0;
    store_query_begin(other, writer, "queries/findings/exam_summary_policy_refresh.sql");
    if (store_run(other) != 0) {
        *query = *other;
        return -1;
    }
    return 0;
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

static mitilog_status store_write_policy(store_link *writer, void *context, mitilog_error *error)
{
    const store_policy *policy = context;
    char *rules_json = NULL, *limits_json = NULL;
    json_writer writer_json;
    json_writer_init(&writer_json);
    store_rules_json(&writer_json, policy);
    mitilog_status status = json_writer_take(&writer_json, &rules_json, error);
    if (status == MITILOG_OK) {
        json_writer_init(&writer_json);
        store_limits_json(&writer_json, policy);
        status = json_writer_take(&writer_json, &limits_json, error);
    }
    if (status != MITILOG_OK) {
        free(rules_json);
        return status;
    }
    store_query upsert, other;
    store_query_begin(&upsert, writer, "queries/findings/policy_upsert.sql");
    store_bind_text(&upsert, ":version", policy->version);
    store_bind_text(&upsert, ":name", policy->name);
    store_bind_text(&upsert, ":normalised_text", store_or_empty(policy->normalised_text));
    store_bind_real(&upsert, ":closed_after_idle_minutes", 1, policy->closed_after_idle_minutes);
    store_bind_real(&upsert, ":gap_cap_seconds", 1, policy->gap_cap_seconds);
    store_bind_text(&upsert, ":rules_json", rules_json);
    store_bind_text(&upsert, ":limits_json", limits_json);
    if (store_run_policy_row(writer, policy->version, &upsert, &other) != 0)
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "policy %s: %s", policy->version,
                                   upsert.error.text);
    free(rules_json);
    free(limits_json);
    return status;
}

mitilog_status store_register_policy(store *st, const store_policy *policy, mitilog_error *error)
{
    if (st == NULL || policy == NULL || policy->version == NULL ||
        strlen(policy->version) >= sizeof st->active_policy)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_register_policy: no store or policy");
    mitilog_status status = store_commit_submit(st, store_write_policy, (void *)policy, error);
    if (status == MITILOG_OK) {
        pthread_mutex_lock(&st->reader_lock);
        snprintf(st->active_policy, sizeof st->active_policy, "%s", policy->version);
        pthread_mutex_unlock(&st->reader_lock);
    }
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
    return json_writer_take(&writer, out, NULL) == MITILOG_OK ? 0 : -1;
}

static int store_insert_finding(store_link *writer, store_query *insert, const store_evaluation *e,
                                const exam_finding *f)
{
    char *uids = NULL;
    store_query_begin(insert, writer, "queries/findings/finding_insert.sql");
    if (store_uids_json(f, &uids) != 0 && insert->status == MITILOG_OK)
        insert->status = mitilog_error_set(&insert->error, MITILOG_ERROR_MEMORY, "out of memory");
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
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++)
        store_bind_text(insert, texts[i].name, texts[i].value);
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
    for (size_t i = 0; i < sizeof reals / sizeof reals[0]; i++)
        store_bind_real(insert, reals[i].name, reals[i].present, reals[i].value);
    store_bind_integer(insert, ":provisional", f->provisional != 0);
    int rc = store_run(insert);
    free(uids);
    return rc;
}

/* Binds the scope of findings_delete.sql and findings_supersede.sql. */
static void store_bind_scope(store_query *query, const store_evaluation *e)
{
    store_bind_text_at(query, 1, e->study_instance_uid);
    store_bind_text_at(query, 2, e->policy_version);
    store_bind_text_at(query, 3, store_or_empty(e->rule_id));
    store_bind_text_at(query, 4, store_or_empty(e->period));
}

static int store_write_context_row(store_link *writer, store_query *query,
                                   const store_evaluation *e)
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
    store_query_begin(query, writer, "queries/findings/exam_context_upsert.sql");
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++)
        store_bind_text(query, texts[i].name, texts[i].value);
    store_bind_integer(query, ":closed", e->closed != 0);
    return store_run(query);
}

static int store_write_measurements(store_link *writer, store_query *query,
                                    const store_evaluation *e, const char *hash)
{
    store_query_begin(query, writer, "queries/findings/exam_measurements_upsert.sql");
    store_bind_text(query, ":study_instance_uid", e->study_instance_uid);
    store_bind_text(query, ":policy_version", e->policy_version);
    const exam_measurements *m = e->measurements;
    exam_index governing = m->governing_index;
    store_bind_text(query, ":governing_index", exam_index_name(governing));
    store_bind_text(query, ":evaluation_hash", hash);
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
    for (size_t i = 0; i < sizeof reals / sizeof reals[0]; i++)
        store_bind_real(query, reals[i].name, reals[i].present, reals[i].value);
    return store_run(query);
}

/* The evaluation's time at or above each threshold of the TI ladder, as
 * rows (after its measurements row, which they refer to). */
static int store_write_time_at_or_above(store_link *writer, store_query *query,
                                        const store_evaluation *e)
{
    store_query_begin(query, writer, "queries/findings/measurement_time_at_or_above_delete.sql");
    store_bind_text(query, ":study_instance_uid", e->study_instance_uid);
    store_bind_text(query, ":policy_version", e->policy_version);
    int rc = store_run(query);
    for (int k = 0; rc == 0 && k < EXAM_TI_STEP_COUNT; k++) {
        store_query_begin(query, writer,
                          "queries/findings/measurement_time_at_or_above_insert.sql");
        store_bind_text(query, ":study_instance_uid", e->study_instance_uid);
        store_bind_text(query, ":policy_version", e->policy_version);
        store_bind_real(query, ":threshold", 1, exam_ti_ladder[k]);
        store_bind_real(query, ":seconds", 1, e->measurements->seconds_at_or_above[k]);
        rc = store_run(query);
    }
    return rc;
}

static mitilog_status store_write_evaluation(store_link *writer, const store_evaluation *e,
                                             store_evaluation_counts *counts, mitilog_error *error)
{
    int exam = e->study_instance_uid != NULL;
    if (!exam && (e->rule_id == NULL || e->period == NULL))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "device-level evaluation without rule or period");
    char hash[HASH_HEX_SIZE];
    if (store_evaluation_hash(e, hash) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "evaluation: out of memory");
    store_query query, other;
    store_query_begin(&query, writer, "queries/findings/policy_ensure.sql");
    store_bind_text(&query, ":version", e->policy_version);
    store_bind_text(&query, ":name", e->policy_name);
    store_bind_text(&query, ":normalised_text", store_or_empty(e->normalised_text));
    int rc = store_run_policy_row(writer, e->policy_version, &query, &other);
    if (rc == 0 && exam)
        rc = store_write_context_row(writer, &query, e);
    /* Unchanged? */
    int unchanged = 0;
    if (rc == 0) {
        store_query_begin(&query, writer,
                          exam ? "queries/findings/evaluation_hash_exam.sql"
                               : "queries/findings/evaluation_hash_device.sql");
        store_bind_text_at(&query, 1, exam ? e->study_instance_uid : e->rule_id);
        store_bind_text_at(&query, 2, e->policy_version);
        if (!exam)
            store_bind_text_at(&query, 3, e->period);
        if (store_query_step(&query)) {
            const char *previous = store_column_text(&query, 0);
            unchanged = previous != NULL && strcmp(previous, hash) == 0 &&
                        store_column_integer(&query, 1) == 0;
        } else if (query.status == MITILOG_OK) {
            query.status = mitilog_error_set(&query.error, MITILOG_ERROR_DATABASE, "no row");
        }
        rc = store_query_end(&query) == MITILOG_OK ? 0 : -1;
    }
    unsigned long written = 0, superseded = 0;
    if (rc == 0 && !unchanged) {
        store_query_begin(&query, writer, "queries/findings/findings_delete.sql");
        store_bind_scope(&query, e);
        rc = store_run(&query);
        if (rc == 0) {
            store_query_begin(&query, writer, "queries/findings/findings_supersede.sql");
            store_bind_scope(&query, e);
            rc = store_run(&query);
            superseded = (unsigned long)store_link_changes(writer);
        }
        for (size_t i = 0; rc == 0 && i < e->finding_count; i++) {
            rc = store_insert_finding(writer, &query, e, &e->findings[i]);
            written++;
        }
        if (rc == 0 && exam) {
            rc = store_write_measurements(writer, &query, e, hash);
            if (rc == 0)
                rc = store_write_time_at_or_above(writer, &query, e);
        } else if (rc == 0) {
            store_query_begin(&query, writer, "queries/findings/device_evaluation_upsert.sql");
            store_bind_text(&query, ":rule_id", e->rule_id);
            store_bind_text(&query, ":policy_version", e->policy_version);
            store_bind_text(&query, ":period", e->period);
            store_bind_text(&query, ":evaluation_hash", hash);
            rc = store_run(&query);
        }
    }
    if (rc != 0)
        return mitilog_error_set(error, MITILOG_ERROR_DATABASE, "evaluation of %s: %s",
                                 exam ? e->study_instance_uid : e->period, query.error.text);
    counts->evaluations++;
    counts->unchanged += unchanged ? 1 : 0;
    counts->written += written;
    counts->superseded += superseded;
    return MITILOG_OK;
}

/* One evaluation request: its input and what it did. */
typedef struct store_evaluation_write {
    const store_evaluation *evaluation;
    store_notification_queueing notify; /* the store's, copied */
    store_evaluation_counts counts;
} store_evaluation_write;

/* An evaluation, after the exam record it was made from when it has one;
 * an exam's evaluation then rewrites the exam's summary. */
static mitilog_status store_write_evaluated(store_link *writer, void *context, mitilog_error *error)
{
    store_evaluation_write *write = context;
    const store_evaluation *evaluation = write->evaluation;
    memset(&write->counts, 0, sizeof write->counts);
    if (evaluation->exam != NULL) {
        mitilog_status status = store_exams_write(writer, evaluation->exam, error);
        if (status != MITILOG_OK)
            return status;
    }
    mitilog_status status = store_write_evaluation(writer, evaluation, &write->counts, error);
    /* Findings to notify, in the same transaction (the outbox); only
     * when the evaluation changed and wrote findings. */
    if (status == MITILOG_OK && write->counts.written > 0)
        status = store_notifications_enqueue(writer, evaluation, &write->notify, error);
    if (status == MITILOG_OK && evaluation->study_instance_uid != NULL)
        status = store_exams_refresh_summary(writer, evaluation->study_instance_uid, error);
    return status;
}

mitilog_status store_put_evaluation(store *st, const store_evaluation *evaluation,
                                    store_evaluation_counts *counts, mitilog_error *error)
{
    if (st == NULL || evaluation == NULL || evaluation->policy_version == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "store_put_evaluation: no store or evaluation");
    if (evaluation->exam != NULL) {
        mitilog_status checked = store_exams_check(evaluation->exam, error);
        if (checked != MITILOG_OK)
            return checked;
    }
    store_evaluation_write write = {.evaluation = evaluation, .notify = st->notify};
    mitilog_status status = store_commit_submit(st, store_write_evaluated, &write, error);
    if (status == MITILOG_OK && counts != NULL) {
        counts->evaluations += write.counts.evaluations;
        counts->unchanged += write.counts.unchanged;
        counts->written += write.counts.written;
        counts->superseded += write.counts.superseded;
    }
    return status;
}

/* ---- reads, on the read connection under reader_lock ---- */

void store_active_policy_version(store *st, char out[65])
{
    out[0] = '\0';
    if (st == NULL)
        return;
    pthread_mutex_lock(&st->reader_lock);
    snprintf(out, 65, "%s", st->active_policy);
    pthread_mutex_unlock(&st->reader_lock);
}

void store_study_context_free(store_study_context *context)
{
    if (context == NULL)
        return;
    free(context->room);
    free(context->preset);
    free(context->shift);
    free(context->transducer);
    free(context->age_group);
    free(context->last_received_at);
    memset(context, 0, sizeof *context);
}

mitilog_status store_load_study_context(store *st, const char *study_instance_uid,
                                        double now_unix_seconds, store_study_context *context,
                                        mitilog_error *error)
{
    memset(context, 0, sizeof *context);
    if (st == NULL || study_instance_uid == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "study context: no study");
    mitilog_status status = MITILOG_OK;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/findings/study_context.sql");
    store_bind_text_at(&query, 1, study_instance_uid);
    store_bind_real_at(&query, 2, now_unix_seconds);
    if (store_query_step(&query)) {
        int failed = 0;
        context->room = store_column_copy(&query, 0, &failed);
        context->preset = store_column_copy(&query, 1, &failed);
        context->shift = store_column_copy(&query, 2, &failed);
        context->transducer = store_column_copy(&query, 3, &failed);
        context->age_group = store_column_copy(&query, 4, &failed);
        context->last_received_at = store_column_copy(&query, 5, &failed);
        context->found = context->last_received_at != NULL;
        context->idle_seconds = store_column_real(&query, 6);
        if (failed)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    } else {
        status = mitilog_error_set(error, MITILOG_ERROR_DATABASE, "study context: %s",
                                   query.status != MITILOG_OK ? query.error.text : "no row");
    }
    store_query_end(&query);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK)
        store_study_context_free(context);
    return status;
}

mitilog_status store_study_days(store *st, const char *study_instance_uid, char ***days,
                                size_t *count, mitilog_error *error)
{
    *days = NULL;
    *count = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "study days: no store");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/findings/study_days.sql");
    store_bind_filter_at(&query, 1, study_instance_uid);
    mitilog_status status = store_query_texts(&query, days, count, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_days_in_period(store *st, const char *from_day, const char *to_day,
                                    char ***days, size_t *count, mitilog_error *error)
{
    *days = NULL;
    *count = 0;
    if (st == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "days in period: no store");
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/findings/days_in_period.sql");
    store_bind_filter_at(&query, 1, from_day);
    store_bind_filter_at(&query, 2, to_day);
    mitilog_status status = store_query_texts(&query, days, count, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

void store_day_instances_free(exam_device_instance *instances, size_t count)
{
    for (size_t i = 0; instances != NULL && i < count; i++) {
        free((char *)instances[i].sop_instance_uid);
        free((char *)instances[i].study_instance_uid);
        free((char *)instances[i].room);
        free((char *)instances[i].transducer);
    }
    free(instances);
}

mitilog_status store_load_day_instances(store *st, const char *day,
                                        exam_device_instance **instances, size_t *count,
                                        mitilog_error *error)
{
    *instances = NULL;
    *count = 0;
    if (st == NULL || day == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "day instances: no day");
    mitilog_status status = MITILOG_OK;
    size_t capacity = 0;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/findings/device_instances.sql");
    store_bind_text_at(&query, 1, day);
    while (status == MITILOG_OK && store_query_step(&query)) {
        if (*count == capacity) {
            size_t grown = capacity ? capacity * 2 : 64;
            exam_device_instance *array = realloc(*instances, grown * sizeof *array);
            if (array == NULL) {
                status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
                break;
            }
            *instances = array;
            capacity = grown;
        }
        exam_device_instance *instance = &(*instances)[(*count)++];
        int failed = 0;
        memset(instance, 0, sizeof *instance);
        instance->sop_instance_uid = store_column_copy(&query, 0, &failed);
        instance->study_instance_uid = store_column_copy(&query, 1, &failed);
        instance->room = store_column_copy(&query, 2, &failed);
        instance->transducer = store_column_copy(&query, 3, &failed);
        instance->has_any_index = store_column_integer(&query, 4) != 0;
        const char *acquired_at = store_column_text(&query, 5);
        double seconds = acquired_at != NULL ? ext_iso_to_seconds(acquired_at) : -1;
        instance->time_seconds = seconds;
        instance->has_time = seconds >= 0;
        if (failed)
            status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    if (store_query_end(&query) != MITILOG_OK && status == MITILOG_OK)
        status =
            mitilog_error_set(error, MITILOG_ERROR_DATABASE, "day instances: %s", query.error.text);
    pthread_mutex_unlock(&st->reader_lock);
    if (status != MITILOG_OK) {
        store_day_instances_free(*instances, *count);
        *instances = NULL;
        *count = 0;
    }
    return status;
}

mitilog_status store_findings_json(store *st, const store_finding_filter *filter, char **json,
                                   mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_findings_json: no store");
    *json = NULL;
    store_finding_filter none = {0};
    if (filter == NULL)
        filter = &none;
    long limit = filter->limit <= 0                         ? STORE_FINDINGS_LIMIT_DEFAULT
                 : filter->limit > STORE_FINDINGS_LIMIT_MAX ? STORE_FINDINGS_LIMIT_MAX
                                                            : filter->limit;
    pthread_mutex_lock(&st->reader_lock);
    store_query query;
    store_query_begin(&query, &st->reader, "queries/findings/findings.sql");
    const char *texts[] = {filter->from, filter->to,     filter->severity, filter->rule,
                           filter->room, filter->preset, filter->shift};
    for (int i = 0; i < 7; i++)
        store_bind_filter_at(&query, i + 1, texts[i]);
    store_bind_integer_at(&query, 8, filter->include_superseded != 0);
    store_bind_integer_at(&query, 9, limit);
    store_bind_sites(&query, filter->sites);
    mitilog_status status = store_query_text(&query, "query findings", 1, json, error);
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}

mitilog_status store_policy_json(store *st, char **json, mitilog_error *error)
{
    if (st == NULL || json == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "store_policy_json: no store");
    *json = NULL;
    mitilog_status status;
    pthread_mutex_lock(&st->reader_lock);
    if (st->active_policy[0] == '\0') {
        status = mitilog_error_set(error, MITILOG_ERROR_NOT_FOUND, "no policy is loaded");
    } else {
        store_query query;
        store_query_begin(&query, &st->reader, "queries/findings/policy_json.sql");
        store_bind_text_at(&query, 1, st->active_policy);
        status = store_query_text(&query, "query policy", 1, json, error);
    }
    pthread_mutex_unlock(&st->reader_lock);
    return status;
}
