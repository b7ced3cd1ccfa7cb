/* First-trimester Doppler: PW, CW or colour in an obstetric exam before
 * before_weeks (default 14+0: 13+6 counts, 14+0 does not). ISUOG: avoid
 * routinely; if used, TI <= 1.0 and short [std: ISUOG safety statement
 * 2011; from memory]. Any Doppler is a finding at the rule's severity; a
 * governing TI above ti_limit, or a Doppler time above
 * doppler_minutes_limit when set, raises it to severity_over_limit. An
 * unknown gestational age does not trigger the rule. */
#include <stdio.h>
#include <stdlib.h>

#include "rules/rules_internal.h"

mitilog_status rules_check_first_trimester(const rules_rule *rule, const rules_view *view,
                                           rules_result *result, mitilog_error *error)
{
    const rules_exam *exam = view->exam;
    if (exam->group != EXAM_GROUP_OBSTETRIC || !exam->gestational_age_known ||
        !(exam->gestational_age_weeks < rule->before_weeks))
        return MITILOG_OK;
    rules_match match;
    /* The highest governing TI during Doppler. */
    if (rules_match_captures(view, view->governing, RULES_AT_OR_ABOVE, -1.0, EXAM_MODES_DOPPLER,
                             &match) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    /* The finding lists every Doppler capture, reporting the index or not. */
    size_t doppler_captures = 0, reporting = match.count;
    double doppler_seconds = 0;
    match.has_span = 0;
    for (size_t i = 0; i < exam->capture_count; i++) {
        const exam_capture *capture = &exam->captures[i];
        if ((capture->modes & EXAM_MODES_DOPPLER) == 0)
            continue;
        match.uids[doppler_captures++] = capture->sop_instance_uid;
        if (capture->has_time) {
            double start = capture->time_seconds, end = start + capture->cine_seconds;
            if (!match.has_span || start < match.first_seconds)
                match.first_seconds = start;
            if (!match.has_span || end > match.last_seconds)
                match.last_seconds = end;
            match.has_span = 1;
        }
    }
    match.count = doppler_captures;
    for (size_t k = 0; k < view->summary.entry_count; k++) {
        if (view->captures[view->entries[k].capture].modes & EXAM_MODES_DOPPLER)
            doppler_seconds += view->entries[k].attributed_seconds;
    }
    mitilog_status status = MITILOG_OK;
    if (doppler_captures > 0) {
        double ti_limit = 0, minutes_limit = 0;
        int has_ti_limit = rules_rule_limit(rule, "ti_limit", exam, &ti_limit);
        int has_minutes_limit =
            rules_rule_limit(rule, "doppler_minutes_limit", exam, &minutes_limit);
        exam_severity severity = rule->severity;
        int over = (has_ti_limit && reporting > 0 && match.max_value > ti_limit) ||
                   (has_minutes_limit && doppler_seconds / 60.0 > minutes_limit);
        if (over && rule->has_severity_over_limit)
            severity = rule->severity_over_limit;
        char note[256];
        snprintf(note, sizeof note,
                 "gestational age %.2f weeks; %zu Doppler capture(s), %zu reporting %s; "
                 "estimated Doppler time %.0f s",
                 exam->gestational_age_weeks, doppler_captures, reporting,
                 exam_index_name(view->governing), doppler_seconds);
        match.estimated_seconds = doppler_seconds;
        status = rules_emit(rule, view, severity, exam_index_name(view->governing), match.max_value,
                            "", has_ti_limit ? &ti_limit : NULL, 0, view->governing, &match, note,
                            result, error);
    }
    free(match.uids);
    return status;
}
