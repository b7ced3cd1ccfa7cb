/* Selecting the captures of an exam that produced a finding. */
#include <stdio.h>
#include <stdlib.h>

#include "rules/rules_internal.h"

static const exam_index thermal_indices[] = {EXAM_INDEX_TIS, EXAM_INDEX_TIB, EXAM_INDEX_TIC,
                                             EXAM_INDEX_TIS_FOCUS, EXAM_INDEX_TIS_SURFACE};

/* The capture's value of index, or of its highest TI when index is
 * EXAM_INDEX_COUNT. Returns 0 when not reported. */
static int capture_value(const exam_capture *capture, exam_index index, double *value,
                         exam_index *which)
{
    int found = 0;
    for (size_t t = 0; t < sizeof thermal_indices / sizeof thermal_indices[0]; t++) {
        exam_index candidate = index == EXAM_INDEX_COUNT ? thermal_indices[t] : index;
        const exam_number *number = &capture->indices[candidate];
        if (number->status == EXAM_VALUE_OK && (!found || number->value > *value)) {
            *value = number->value;
            *which = candidate;
            found = 1;
        }
        if (index != EXAM_INDEX_COUNT)
            break;
    }
    return found;
}

/* Timeline time attributed to capture i (0 if untimed). */
static double attributed(const rules_view *view, size_t capture)
{
    for (size_t k = 0; k < view->summary.entry_count; k++) {
        if (view->entries[k].capture == capture)
            return view->entries[k].attributed_seconds;
    }
    return 0;
}

int rules_match_captures(const rules_view *view, exam_index index, rules_compare compare,
                         double threshold, unsigned mode_mask, rules_match *match)
{
    const rules_exam *exam = view->exam;
    *match = (rules_match){0};
    match->max_index = index;
    match->uids = calloc(exam->capture_count ? exam->capture_count : 1, sizeof *match->uids);
    if (match->uids == NULL)
        return -1;
    for (size_t i = 0; i < exam->capture_count; i++) {
        const exam_capture *capture = &view->captures[i];
        double value = 0;
        exam_index which = index;
        if (mode_mask != 0 && (capture->modes & mode_mask) == 0)
            continue;
        if (!capture_value(capture, index, &value, &which))
            continue;
        if (compare == RULES_AT_OR_ABOVE ? !(value >= threshold) : !(value > threshold))
            continue;
        if (match->count == 0 || value > match->max_value) {
            match->max_value = value;
            match->max_index = which;
        }
        match->uids[match->count++] = exam->captures[i].sop_instance_uid;
        match->estimated_seconds += attributed(view, i);
        if (capture->has_time) {
            double t = capture->time_seconds;
            if (!match->has_span || t < match->first_seconds)
                match->first_seconds = t;
            if (!match->has_span || t + capture->cine_seconds > match->last_seconds)
                match->last_seconds = t + capture->cine_seconds;
            match->has_span = 1;
        }
    }
    return 0;
}

int rules_highest(const rules_view *view, exam_index index, double *value, exam_index *which)
{
    int found = 0;
    *value = 0;
    *which = index;
    for (size_t i = 0; i < view->exam->capture_count; i++) {
        double candidate = 0;
        exam_index candidate_index = index;
        if (capture_value(&view->captures[i], index, &candidate, &candidate_index) &&
            (!found || candidate > *value)) {
            *value = candidate;
            *which = candidate_index;
            found = 1;
        }
    }
    return found;
}

mitilog_status rules_emit(const rules_rule *rule, const rules_view *view, exam_severity severity,
                          const char *quantity, double measured, const char *unit,
                          const double *limit, double threshold, exam_index index,
                          const rules_match *match, const char *note, rules_result *result,
                          mitilog_error *error)
{
    char assumptions[1024];
    snprintf(assumptions, sizeof assumptions, "%s%s%s", note ? note : "", note ? "; " : "",
             view->assumptions ? view->assumptions : "");
    rules_finding_input input = {0};
    input.rule = rule;
    input.severity = severity;
    input.quantity = quantity;
    input.measured = measured;
    input.unit = unit;
    input.limit = limit ? *limit : 0;
    input.has_limit = limit != NULL;
    input.threshold = threshold;
    input.index = index;
    input.has_index = index < EXAM_INDEX_COUNT;
    if (match != NULL) {
        input.instance_uids = match->uids;
        input.instance_count = match->count;
        input.first_seconds = match->first_seconds;
        input.last_seconds = match->last_seconds;
        input.has_span = match->has_span;
        input.estimated_seconds = match->estimated_seconds;
    }
    input.assumptions = assumptions;
    input.provisional = !view->exam->closed;
    input.study_instance_uid = view->exam->study_instance_uid;
    input.room = view->exam->room;
    input.transducer = view->exam->transducer;
    return rules_result_append(result, &input, view->policy_version, error);
}
