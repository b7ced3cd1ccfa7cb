/* Which rules and which limits apply to an exam. */
#include <string.h>

#include "rules/rules_internal.h"

static int selector_matches(const rules_selector *selector, const rules_exam *exam)
{
    switch (selector->kind) {
    case RULES_SELECT_ALL: return 1;
    case RULES_SELECT_CATEGORY:
        return exam->category != NULL && strcmp(exam->category, selector->category) == 0;
    case RULES_SELECT_GROUP: return (int)exam->group == selector->value;
    case RULES_SELECT_AGE:
        /* An unknown age is read as adult (rules.h). */
        return (int)(exam->age == RULES_AGE_UNKNOWN ? RULES_AGE_ADULT : exam->age) ==
               selector->value;
    }
    return 0;
}

int rules_rule_applies(const rules_rule *rule, const rules_exam *exam)
{
    if (!rule->enabled)
        return 0;
    for (size_t i = 0; i < rule->except_count; i++) {
        if (selector_matches(&rule->excepts[i], exam))
            return 0;
    }
    if (rule->applies_count == 0)
        return 1;
    for (size_t i = 0; i < rule->applies_count; i++) {
        if (selector_matches(&rule->applies[i], exam))
            return 1;
    }
    return 0;
}

int rules_rule_limit(const rules_rule *rule, const char *base, const rules_exam *exam,
                     double *value)
{
    /* Most specific first: category, group, age, plain. */
    static const rules_selector_kind order[] = {RULES_SELECT_CATEGORY, RULES_SELECT_GROUP,
                                                RULES_SELECT_AGE, RULES_SELECT_ALL};
    for (size_t k = 0; k < sizeof order / sizeof order[0]; k++) {
        for (size_t i = 0; i < rule->limit_count; i++) {
            const rules_limit *limit = &rule->limits[i];
            if (limit->selector.kind != order[k] || strcmp(limit->base, base) != 0 ||
                !selector_matches(&limit->selector, exam))
                continue;
            if (limit->off)
                return 0;
            *value = limit->value;
            return 1;
        }
    }
    return 0;
}

void rules_policy_limits(const rules_policy *policy, exam_group group, rules_age age,
                         exam_limits *limits)
{
    memset(limits, 0, sizeof *limits);
    limits->group = group;
    limits->age_group = rules_age_name(age);
    rules_exam exam = {.group = group, .age = age};
    int has_ti = 0, has_mi = 0, has_equipment = 0;
    for (size_t r = 0; r < policy->rule_count; r++) {
        const rules_rule *rule = &policy->rules[r];
        if (!rules_rule_applies(rule, &exam))
            continue;
        if (rule->kind == RULES_KIND_TI_CEILING && !has_ti) {
            has_ti = 1;
            limits->has_ti_ceiling = rules_rule_limit(rule, "limit", &exam, &limits->ti_ceiling);
        } else if (rule->kind == RULES_KIND_MI_CEILING && !has_mi) {
            has_mi = 1;
            limits->has_mi_ceiling = rules_rule_limit(rule, "limit", &exam, &limits->mi_ceiling);
        } else if (rule->kind == RULES_KIND_EQUIPMENT_MAXIMA && !has_equipment) {
            has_equipment = 1;
            limits->has_mi_equipment =
                rules_rule_limit(rule, "mi_limit", &exam, &limits->mi_equipment);
            limits->has_ti_equipment =
                rules_rule_limit(rule, "ti_limit", &exam, &limits->ti_equipment);
        } else if (rule->kind == RULES_KIND_DWELL && limits->dwell_rule == NULL) {
            limits->dwell_rule = rule->id;
            limits->dwell_count = rule->step_count;
            memcpy(limits->dwell, rule->steps, rule->step_count * sizeof rule->steps[0]);
        }
    }
}
