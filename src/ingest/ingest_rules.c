/*
 * ingest_rules.c - the ALARA policy engine (src/rules) made live: after a
 * study's exam record is rebuilt, the exam is evaluated under the current
 * policy and the result written with the exam record in one transaction
 * (store_put_evaluation); rule output_not_reported is evaluated per day
 * over that day's instances (device-level findings, study NULL, period =
 * the day).
 *
 * Open/closed: an exam is closed when now - its last receipt >=
 * closed_after_idle_minutes; the clock is ingest_clock_now() only.
 * Choices: the exam's governing index is the exam record's (it already
 * follows docs/domain.md section 3 with the site's exam type); the group
 * comes from the site's [exam_type KEY] group key; the age group, room,
 * preset, shift and transducer are the first instance's.
 */
#include "ingest/ingest.h"
#include "ingest/ingest_internal.h"
#include "store/store_readings.h"
#include "store/store_exams.h"
#include "store/store_findings.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "extract/ext_exam.h"
#include "util/log.h"

double ingest_clock_now(void)
{
    struct timespec now;
    clock_gettime(CLOCK_REALTIME, &now);
    return (double)now.tv_sec + (double)now.tv_nsec / 1e9;
}

mitilog_status ingest_register_policy(store *st, const rules_policy *policy, mitilog_error *error)
{
    size_t count = rules_policy_rule_count(policy);
    exam_rule_info *rules = calloc(count ? count : 1, sizeof *rules);
    mitilog_status status = MITILOG_OK;
    if (rules == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    size_t described = 0;
    for (size_t r = 0; r < count; r++)
        if (rules_policy_rule_at(policy, r, &rules[described]) == 0)
            described++;
    /* The limits of every group and age group (an unknown age reads as
     * adult), for the dashboard. */
    static const rules_age ages[] = {RULES_AGE_ADULT, RULES_AGE_CHILD, RULES_AGE_NEONATE};
    enum { LIMIT_COUNT = EXAM_GROUP_COUNT * (sizeof ages / sizeof ages[0]) };
    exam_limits limits[LIMIT_COUNT];
    size_t limit_count = 0;
    for (int g = 0; g < EXAM_GROUP_COUNT; g++)
        for (size_t a = 0; a < sizeof ages / sizeof ages[0]; a++)
            rules_policy_limits(policy, (exam_group)g, ages[a], &limits[limit_count++]);
    store_policy input = {
        .version = rules_policy_version(policy),
        .name = NULL,
        .normalised_text = rules_policy_normalised(policy),
        .closed_after_idle_minutes = rules_policy_closed_after_idle_minutes(policy),
        .gap_cap_seconds = rules_policy_gap_cap_seconds(policy),
        .rules = rules,
        .rule_count = described,
        .limits = limits,
        .limit_count = limit_count,
    };
    input.name = rules_policy_name(policy);
    status = store_register_policy(st, &input, error);
    if (status == MITILOG_OK)
        status = store_set_index_source(st, rules_policy_index_source(policy), error);
    free(rules);
    return status;
}

/* One header_screen_mismatch finding per capture and index whose header
 * and screen disagree beyond the screen's rounding (docs/policy.md): not a
 * rule of the policy file, always on, since a device whose header does not
 * match its display makes every header-based audit of it doubtful. */
static mitilog_status ingest_add_mismatches(rules_result *result, const char *study,
                                            const store_mismatch *mismatches, size_t mismatch_count,
                                            mitilog_error *error)
{
    mitilog_status status = MITILOG_OK;
    for (size_t i = 0; i < mismatch_count && status == MITILOG_OK; i++) {
        const store_mismatch *mm = &mismatches[i];
        char assumptions[512], source[512];
        snprintf(assumptions, sizeof assumptions,
                 "header %s = %g; the screen showed %s (%d decimal%s); they differ by more "
                 "than the screen's rounding",
                 mm->index, mm->header_value, mm->screen_text ? mm->screen_text : "?", mm->decimals,
                 mm->decimals == 1 ? "" : "s");
        snprintf(source, sizeof source,
                 "device of screen profile %s version %d%s%s: its DICOM header does not match "
                 "its display; check the device's software with its vendor",
                 mm->profile_key ? mm->profile_key : "?", mm->profile_version,
                 mm->room && mm->room[0] ? ", room " : "", mm->room ? mm->room : "");
        char *uid = mm->sop_instance_uid ? mm->sop_instance_uid : "";
        exam_finding finding = {
            .rule_id = "header_screen_mismatch",
            .severity = EXAM_SEVERITY_WARNING,
            .quantity = mm->index,
            .unit = "",
            .measured = mm->screen_value,
            .has_limit = 0,
            .instance_uids = &uid,
            .instance_count = 1,
            .assumptions = assumptions,
            .source = source,
            .study_instance_uid = (char *)study,
        };
        memcpy(finding.policy_version, result->policy_version, sizeof finding.policy_version);
        status = rules_result_add(result, &finding, error);
    }
    return status;
}

mitilog_status ingest_evaluate_day(store *st, const rules_policy *policy, const char *day,
                                   store_evaluation_counts *counts, mitilog_error *error)
{
    exam_device_instance *instances = NULL;
    size_t count = 0;
    mitilog_status status = store_load_day_instances(st, day, &instances, &count, error);
    if (status != MITILOG_OK)
        return status;
    rules_result result = {0};
    status = rules_output_not_reported(policy, instances, count, &result, error);
    if (status != MITILOG_OK)
        goto done;
    store_evaluation evaluation = {
        .policy_version = rules_policy_version(policy),
        .policy_name = rules_policy_name(policy),
        .normalised_text = rules_policy_normalised(policy),
        .rule_id = "output_not_reported",
        .period = day,
        .closed = 1,
        .findings = result.findings,
        .finding_count = result.finding_count,
    };
    status = store_put_evaluation(st, &evaluation, counts, error);
done:
    rules_result_free(&result);
    store_day_instances_free(instances, count);
    return status;
}

/* Evaluates a built exam (the instances it was built from) and writes
 * the exam record with its evaluation, in one transaction. */
static mitilog_status ingest_evaluate_exam(store *st, const rules_policy *policy,
                                           const store_exam *record, double now,
                                           store_evaluation_counts *counts, mitilog_error *error)
{
    const char *study = record->study_instance_uid;
    const ext_exam *exam = record->exam;
    store_study_context context;
    mitilog_status status = store_load_study_context(st, study, now, &context, error);
    if (status != MITILOG_OK || !context.found) {
        store_study_context_free(&context);
        /* No instance left to give a context: the record alone. */
        return status != MITILOG_OK ? status : store_put_exam(st, record, error);
    }
    rules_result result = {0};
    store_mismatch *mismatches = NULL;
    size_t mismatch_count = 0;
    rules_age age = RULES_AGE_UNKNOWN;
    if (context.age_group != NULL && rules_age_parse(context.age_group, &age) != 0)
        age = RULES_AGE_UNKNOWN;
    double idle_minutes = rules_policy_closed_after_idle_minutes(policy);
    rules_exam input = {
        .study_instance_uid = study,
        .category = exam->exam_type != NULL ? exam->exam_type->key : NULL,
        .group = ext_exam_type_group(exam->exam_type),
        .age = age,
        .gestational_age_weeks = exam->gestational_age_weeks,
        .gestational_age_known = exam->has_gestational_age,
        .governing_index = exam->governing_index,
        .has_governing_index = 1,
        .room = context.room,
        .transducer = context.transducer,
        .preset = context.preset,
        .closed = context.idle_seconds >= idle_minutes * 60.0,
        .sr_scan_time_seconds = exam->sr_scan_time_seconds,
        .captures = exam->captures,
        .capture_count = exam->capture_count,
    };
    status = rules_evaluate(policy, &input, &result, error);
    if (status != MITILOG_OK)
        goto done;
    status = store_load_mismatches(st, study, &mismatches, &mismatch_count, error);
    if (status == MITILOG_OK)
        status = ingest_add_mismatches(&result, study, mismatches, mismatch_count, error);
    if (status != MITILOG_OK)
        goto done;
    store_evaluation evaluation = {
        .exam = record,
        .policy_version = rules_policy_version(policy),
        .policy_name = rules_policy_name(policy),
        .normalised_text = rules_policy_normalised(policy),
        .study_instance_uid = study,
        .exam_type = input.category,
        .room = context.room,
        .preset = context.preset,
        .shift = context.shift,
        .transducer = context.transducer,
        .age_group = context.age_group,
        .last_received_at = context.last_received_at,
        .closed = input.closed,
        .findings = result.findings,
        .finding_count = result.finding_count,
        .measurements = &result.measurements,
    };
    status = store_put_evaluation(st, &evaluation, counts, error);
done:
    store_mismatches_free(mismatches, mismatch_count);
    rules_result_free(&result);
    store_study_context_free(&context);
    return status;
}

mitilog_status ingest_evaluate_study(store *st, const ext_site_rules *rules,
                                     const rules_policy *policy, const char *study, double now,
                                     store_evaluation_counts *counts, mitilog_error *error)
{
    ext_exam_instance *instances = NULL;
    size_t count = 0;
    mitilog_status status = store_load_study(st, study, &instances, &count, error);
    if (status != MITILOG_OK || count == 0) {
        store_study_free(instances, count);
        return status;
    }
    ext_exam exam;
    status = ext_exam_build(rules, instances, count, &exam, error);
    if (status == MITILOG_OK) {
        store_exam input = {study, &exam, instances, count};
        status = policy != NULL ? ingest_evaluate_exam(st, policy, &input, now, counts, error)
                                : store_put_exam(st, &input, error);
        ext_exam_free(&exam);
    }
    store_study_free(instances, count);
    return status;
}
