/* One exam under a policy: the governing index, the timeline, then each
 * enabled rule in policy order. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "rules/rules_internal.h"

exam_index rules_governing_index(const rules_exam *exam)
{
    /* The policy group's rule of docs/domain.md section 3: obstetric by
     * gestation, transcranial TIC, everything else (neonatal head
     * included) TIS. */
    exam_governing rule = EXAM_GOVERNING_TIS;
    if (exam->group == EXAM_GROUP_OBSTETRIC)
        rule = EXAM_GOVERNING_BY_GESTATION;
    else if (exam->group == EXAM_GROUP_TRANSCRANIAL)
        rule = EXAM_GOVERNING_TIC;
    return exam_governing_index(rule, exam->gestational_age_known, exam->gestational_age_weeks,
                                NULL);
}
static void measure(rules_view *view, exam_measurements *out)
{
    memset(out, 0, sizeof *out);
    out->governing_index = view->governing;
    const rules_exam *exam = view->exam;
    for (size_t i = 0; i < exam->capture_count; i++) {
        for (int x = 0; x < EXAM_INDEX_COUNT; x++) {
            const exam_number *value = &exam->captures[i].indices[x];
            if (value->status != EXAM_VALUE_OK)
                continue;
            if (!out->index_reported[x] || value->value > out->max_index[x])
                out->max_index[x] = value->value;
            out->index_reported[x] = 1;
        }
    }
    out->estimated_seconds = view->summary.estimated_seconds;
    out->span_seconds = view->summary.span_seconds;
    for (size_t k = 0; k < view->summary.entry_count; k++) {
        if (view->captures[view->entries[k].capture].modes & EXAM_MODES_DOPPLER)
            out->doppler_seconds += view->entries[k].attributed_seconds;
    }
    out->cem43_minutes = rules_timeline_cem43(view);
    for (int k = 0; k < EXAM_TI_STEP_COUNT; k++)
        out->seconds_at_or_above[k] =
            ext_timeline_time_at_or_above(view->captures, view->entries, view->summary.entry_count,
                                          view->governing, exam_ti_ladder[k]);
}

static void describe_timeline(const rules_view *view, double gap_cap, char *out, size_t size)
{
    const ext_timeline_summary *summary = &view->summary;
    const rules_exam *exam = view->exam;
    char unreported[96] = "";
    double missing = ext_timeline_time_unreported(view->captures, view->entries,
                                                  summary->entry_count, view->governing);
    if (missing > 0)
        snprintf(unreported, sizeof unreported, "; %s not reported for %.0f s (not counted)",
                 exam_index_name(view->governing), missing);
    char bound[96] = "";
    if (summary->scale < 1.0)
        snprintf(bound, sizeof bound, "; scaled x%.3f to the SR scan time %.0f s", summary->scale,
                 exam->sr_scan_time_seconds);
    snprintf(out, size,
             "estimate: interval since the previous capture attributed to each capture; "
             "gap cap %.0f s (%zu capped); cine = frames x frame time; "
             "%zu capture(s) without a time not counted%s%s; governing index %s (%s)",
             gap_cap, summary->capped_count, summary->untimed_count, bound, unreported,
             exam_index_name(view->governing),
             exam->has_governing_index ? "from the exam record" : "docs/domain.md section 3");
}

static mitilog_status check_rule(const rules_rule *rule, const rules_view *view,
                                 rules_result *result, mitilog_error *error)
{
    switch (rule->kind) {
    case RULES_KIND_TI_CEILING:
    case RULES_KIND_MI_CEILING: return rules_check_ceiling(rule, view, result, error);
    case RULES_KIND_EQUIPMENT_MAXIMA: return rules_check_equipment(rule, view, result, error);
    case RULES_KIND_DWELL: return rules_check_dwell(rule, view, result, error);
    case RULES_KIND_FIRST_TRIMESTER_DOPPLER:
        return rules_check_first_trimester(rule, view, result, error);
    case RULES_KIND_THERMAL_DOSE: return rules_check_thermal_dose(rule, view, result, error);
    case RULES_KIND_EXAM_DURATION: return rules_check_duration(rule, view, result, error);
    default: return MITILOG_OK; /* output_not_reported: rules_output_not_reported() */
    }
}

mitilog_status rules_evaluate(const rules_policy *policy, const rules_exam *exam,
                              rules_result *result, mitilog_error *error)
{
    if (result == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "rules_evaluate: no result");
    memset(result, 0, sizeof *result);
    if (policy == NULL || exam == NULL || (exam->capture_count > 0 && exam->captures == NULL))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "rules_evaluate: no policy or exam");
    memcpy(result->policy_version, policy->version, HASH_HEX_SIZE);
    rules_view view;
    memset(&view, 0, sizeof view);
    view.exam = exam;
    view.policy_version = policy->version;
    view.governing = exam->has_governing_index && exam->governing_index < EXAM_INDEX_COUNT
                         ? exam->governing_index
                         : rules_governing_index(exam);
    size_t count = exam->capture_count ? exam->capture_count : 1;
    view.captures = exam->captures;
    view.entries = calloc(count, sizeof *view.entries);
    char assumptions[768];
    mitilog_status status = MITILOG_OK;
    if (view.entries == NULL) {
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
        goto done;
    }
    ext_timeline_build(view.captures, exam->capture_count, policy->gap_cap_seconds,
                       exam->sr_scan_time_seconds, view.entries, &view.summary);
    describe_timeline(&view, policy->gap_cap_seconds, assumptions, sizeof assumptions);
    view.assumptions = assumptions;
    measure(&view, &result->measurements);
    for (size_t r = 0; r < policy->rule_count && status == MITILOG_OK; r++) {
        if (rules_rule_applies(&policy->rules[r], exam))
            status = check_rule(&policy->rules[r], &view, result, error);
    }
done:
    free(view.entries);
    if (status != MITILOG_OK)
        rules_result_free(result);
    return status;
}
