/* Which rules and which limits apply to an exam. */
#include <string.h>

#include "rules/rules_internal.h"

static int selector_matches(const rules_selector *selector, const rules_exam *exam)
{
    switch (selector->kind) {
    case RULES_SELECT_ALL:
        return 1;
    case RULES_SELECT_CATEGORY:
        return exam->category != NULL && strcmp(exam->category, selector->category) == 0;
    case RULES_SELECT_GROUP:
        return (int)exam->group == selector->value;
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
