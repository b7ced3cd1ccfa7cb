/* Thermal dose (CEM43, reported for every exam in the measurements; a
 * finding only when a limit is set) and exam duration (optional). */
#include <stdio.h>
#include <stdlib.h>

#include "rules/rules_internal.h"

mitilog_status rules_check_thermal_dose(const rules_rule *rule, const rules_view *view,
                                        rules_result *result, mitilog_error *error)
{
    double limit;
    if (!rules_rule_limit(rule, "limit", view->exam, &limit))
        return MITILOG_OK;
    double dose = rules_timeline_cem43(view);
    if (!(dose > limit))
        return MITILOG_OK;
    rules_match match;
    if (rules_match_captures(view, view->governing, RULES_AT_OR_ABOVE, 0, 0, &match) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    mitilog_status status =
        rules_emit(rule, view, rule->severity, "cem43", dose, "CEM43 min", &limit, 0,
                   view->governing, &match, "T = 37 C + governing TI (worst case)", result, error);
    free(match.uids);
    return status;
}

mitilog_status rules_check_duration(const rules_rule *rule, const rules_view *view,
                                    rules_result *result, mitilog_error *error)
{
    double limit;
    if (!rules_rule_limit(rule, "limit", view->exam, &limit))
        return MITILOG_OK;
    double minutes = view->summary.span_seconds / 60.0;
    if (!(minutes > limit))
        return MITILOG_OK;
    rules_match match = {0};
    match.max_index = EXAM_INDEX_COUNT;
    if (view->summary.entry_count > 0) {
        const exam_capture *first = &view->captures[view->entries[0].capture];
        match.first_seconds = first->time_seconds;
        match.last_seconds = first->time_seconds + view->summary.span_seconds;
        match.has_span = 1;
    }
    match.estimated_seconds = view->summary.estimated_seconds;
    return rules_emit(rule, view, rule->severity, "duration", minutes, "min", &limit, 0,
                      EXAM_INDEX_COUNT, &match, "duration = last capture time - first", result,
                      error);
}
