/* Dwell-time tables: the estimated time at or above each displayed-TI
 * threshold (governing index) against the table's longest time. "At or
 * above" is >= (docs/domain.md section 5); a time equal to the limit
 * is allowed, a longer one is a finding; a "not recommended" step makes
 * any capture at or above its threshold a finding, even one with no
 * attributed time. */
#include <stdio.h>
#include <stdlib.h>

#include "rules/rules_internal.h"

mitilog_status rules_check_dwell(const rules_rule *rule, const rules_view *view,
                                 rules_result *result, mitilog_error *error)
{
    mitilog_status status = MITILOG_OK;
    for (size_t s = 0; s < rule->step_count && status == MITILOG_OK; s++) {
        const exam_dwell_step *step = &rule->steps[s];
        rules_match match;
        if (rules_match_captures(view, view->governing, RULES_AT_OR_ABOVE, step->threshold, 0,
                                 &match) != 0)
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
        double minutes =
            ext_timeline_time_at_or_above(view->captures, view->entries, view->summary.entry_count,
                                          view->governing, step->threshold) /
            60.0;
        int found = step->not_recommended ? match.count > 0 : minutes > step->minutes;
        if (found) {
            char note[200], threshold[32], limit_text[32];
            rules_format_number(step->threshold, threshold, sizeof threshold);
            rules_format_number(step->minutes, limit_text, sizeof limit_text);
            if (step->not_recommended)
                snprintf(note, sizeof note, "%s >= %s: not recommended at all",
                         exam_index_name(view->governing), threshold);
            else
                snprintf(note, sizeof note, "%s >= %s: at most %s min",
                         exam_index_name(view->governing), threshold, limit_text);
            double limit = step->not_recommended ? 0 : step->minutes;
            status =
                rules_emit(rule, view, rule->severity, "time_at_or_above", minutes, "min", &limit,
                           step->threshold, view->governing, &match, note, result, error);
        }
        free(match.uids);
    }
    return status;
}
