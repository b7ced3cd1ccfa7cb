/* Ceilings: the governing TI, the MI, and the equipment maxima. A value
 * strictly above the limit is a finding (a limit is "at most"). */
#include <stdio.h>
#include <stdlib.h>

#include "rules/rules_internal.h"

static mitilog_status check_one(const rules_rule *rule, const rules_view *view, exam_index index,
                                const char *base, const char *quantity, const char *note,
                                rules_result *result, mitilog_error *error)
{
    double limit;
    if (!rules_rule_limit(rule, base, view->exam, &limit))
        return MITILOG_OK;
    rules_match match;
    if (rules_match_captures(view, index, RULES_ABOVE, limit, 0, &match) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    mitilog_status status = MITILOG_OK;
    if (match.count > 0)
        status = rules_emit(rule, view, rule->severity, quantity, match.max_value, "", &limit, 0,
                            match.max_index, &match, note, result, error);
    free(match.uids);
    return status;
}

mitilog_status rules_check_ceiling(const rules_rule *rule, const rules_view *view,
                                   rules_result *result, mitilog_error *error)
{
    if (rule->kind == RULES_KIND_MI_CEILING)
        return check_one(rule, view, EXAM_INDEX_MI, "limit", "mi", NULL, result, error);
    return check_one(rule, view, view->governing, "limit", exam_index_name(view->governing), NULL,
                     result, error);
}

mitilog_status rules_check_equipment(const rules_rule *rule, const rules_view *view,
                                     rules_result *result, mitilog_error *error)
{
    static const char note[] =
        "above the equipment maxima: check the equipment and its labelling, not the user";
    mitilog_status status =
        check_one(rule, view, EXAM_INDEX_MI, "mi_limit", "mi", note, result, error);
    if (status != MITILOG_OK)
        return status;
    /* Any displayed TI (the highest of the five kinds) counts here. */
    return check_one(rule, view, EXAM_INDEX_COUNT, "ti_limit", "ti", note, result, error);
}
