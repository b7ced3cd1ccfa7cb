/* The loaded policy: names, normalised text, version, iteration, free. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "rules/rules_internal.h"

static const char *const kind_names[RULES_KIND_COUNT] = {
    "ti_ceiling",          "mi_ceiling",   "equipment_maxima", "dwell", "first_trimester_doppler",
    "output_not_reported", "thermal_dose", "exam_duration"};

static const char *const kind_descriptions[RULES_KIND_COUNT] = {
    "highest governing TI of the exam above the ceiling",
    "highest MI of the exam above the ceiling",
    "displayed MI or TI above the equipment maxima: an equipment or labelling problem",
    "estimated time at or above each displayed-TI threshold longer than the table allows",
    "PW, CW or colour Doppler in an obstetric exam before the given week",
    "ultrasound instances with no index at all, per room and transducer",
    "thermal dose CEM43 estimated from the timeline (reported for every exam)",
    "exam duration (first to last capture) above the limit"};

const char *rules_kind_name(rules_kind kind)
{
    return kind < RULES_KIND_COUNT ? kind_names[kind] : "unknown";
}

static const char *const age_names[RULES_AGE_COUNT] = {"unknown", "adult", "child", "neonate"};

const char *rules_age_name(rules_age age)
{
    return age < RULES_AGE_COUNT ? age_names[age] : "unknown";
}

static int lookup(const char *const *names, int count, const char *text)
{
    for (int i = 0; text != NULL && i < count; i++) {
        if (strcmp(names[i], text) == 0)
            return i;
    }
    return -1;
}

int rules_age_parse(const char *text, rules_age *age)
{
    int found = lookup(age_names, RULES_AGE_COUNT, text);
    if (found < 0)
        return -1;
    *age = (rules_age)found;
    return 0;
}

void rules_format_number(double value, char *out, size_t size)
{
    snprintf(out, size, "%.10g", value);
    if (strpbrk(out, ".en") == NULL && strlen(out) + 2 < size)
        strcat(out, ".0");
}

static void format_selector(const rules_selector *selector, char separator, char *out, size_t size)
{
    switch (selector->kind) {
    case RULES_SELECT_CATEGORY:
        snprintf(out, size, "category%c%s", separator, selector->category);
        break;
    case RULES_SELECT_GROUP:
        snprintf(out, size, "group%c%s", separator, exam_group_name((exam_group)selector->value));
        break;
    case RULES_SELECT_AGE:
        snprintf(out, size, "age%c%s", separator, rules_age_name((rules_age)selector->value));
        break;
    default: out[0] = '\0';
    }
}

static int compare_text(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

static int compare_setting(const void *a, const void *b)
{
    return strcmp(((const exam_setting *)a)->key, ((const exam_setting *)b)->key);
}

static int compare_rule(const void *a, const void *b)
{
    const rules_rule *left = a, *right = b;
    if (left->kind != right->kind)
        return left->kind < right->kind ? -1 : 1;
    return strcmp(left->id, right->id);
}

static int add_setting(rules_rule *rule, const char *key, const char *value)
{
    exam_setting *grown = realloc(rule->settings, (rule->setting_count + 1) * sizeof *grown);
    if (grown == NULL)
        return -1;
    rule->settings = grown;
    char *key_copy = strdup(key), *value_copy = strdup(value);
    if (key_copy == NULL || value_copy == NULL) {
        free(key_copy);
        free(value_copy);
        return -1;
    }
    rule->settings[rule->setting_count].key = key_copy;
    rule->settings[rule->setting_count].value = value_copy;
    rule->setting_count++;
    return 0;
}

/* "group:neonatal, group:obstetric": sorted so order in the file does not
 * matter. */
static int add_selector_list(rules_rule *rule, const char *key, const rules_selector *list,
                             size_t count)
{
    if (count == 0)
        return 0;
    char items[RULES_MAX_SELECTORS][160];
    char *pointers[RULES_MAX_SELECTORS];
    for (size_t i = 0; i < count; i++) {
        format_selector(&list[i], ':', items[i], sizeof items[i]);
        pointers[i] = items[i];
    }
    qsort(pointers, count, sizeof pointers[0], compare_text);
    char joined[RULES_MAX_SELECTORS * 162] = "";
    for (size_t i = 0; i < count; i++) {
        if (i > 0)
            strcat(joined, ", ");
        strcat(joined, pointers[i]);
    }
    return add_setting(rule, key, joined);
}

/* Collapses runs of white space so re-wrapping a source does not change
 * the version. */
static void collapse_spaces(char *text)
{
    char *out = text;
    int space = 0;
    for (char *in = text; *in; in++) {
        if (*in == ' ' || *in == '\t' || *in == '\r' || *in == '\n') {
            space = out != text;
            continue;
        }
        if (space)
            *out++ = ' ';
        space = 0;
        *out++ = *in;
    }
    *out = '\0';
}

static int build_settings(rules_rule *rule)
{
    char key[200], value[64];
    collapse_spaces(rule->source);
    int failed = add_setting(rule, "enabled", rule->enabled ? "yes" : "no") ||
                 add_setting(rule, "severity", exam_severity_name(rule->severity)) ||
                 add_selector_list(rule, "applies", rule->applies, rule->applies_count) ||
                 add_selector_list(rule, "except", rule->excepts, rule->except_count);
    if (rule->has_severity_over_limit)
        failed = failed || add_setting(rule, "severity_over_limit",
                                       exam_severity_name(rule->severity_over_limit));
    if (rule->kind == RULES_KIND_FIRST_TRIMESTER_DOPPLER) {
        rules_format_number(rule->before_weeks, value, sizeof value);
        failed = failed || add_setting(rule, "before_weeks", value);
    }
    if (rule->kind == RULES_KIND_OUTPUT_NOT_REPORTED) {
        snprintf(value, sizeof value, "%u", rule->minimum_instances);
        failed = failed || add_setting(rule, "minimum_instances", value);
    }
    for (size_t i = 0; i < rule->step_count && !failed; i++) {
        char threshold[64];
        rules_format_number(rule->steps[i].threshold, threshold, sizeof threshold);
        snprintf(key, sizeof key, "dwell.%s", threshold);
        if (rule->steps[i].not_recommended)
            snprintf(value, sizeof value, "not_recommended");
        else
            rules_format_number(rule->steps[i].minutes, value, sizeof value);
        failed = add_setting(rule, key, value);
    }
    for (size_t i = 0; i < rule->limit_count && !failed; i++) {
        const rules_limit *limit = &rule->limits[i];
        char selector[160];
        format_selector(&limit->selector, '.', selector, sizeof selector);
        snprintf(key, sizeof key, "%s%s%s", limit->base, selector[0] ? "." : "", selector);
        if (limit->off)
            snprintf(value, sizeof value, "off");
        else
            rules_format_number(limit->value, value, sizeof value);
        failed = add_setting(rule, key, value);
    }
    failed = failed || add_setting(rule, "source", rule->source);
    if (!failed)
        qsort(rule->settings, rule->setting_count, sizeof rule->settings[0], compare_setting);
    return failed ? -1 : 0;
}

static int append_text(char **text, size_t *length, size_t *capacity, const char *piece)
{
    size_t add = strlen(piece);
    if (*length + add + 1 > *capacity) {
        size_t wanted = (*capacity ? *capacity * 2 : 1024) + add;
        char *grown = realloc(*text, wanted);
        if (grown == NULL)
            return -1;
        *text = grown;
        *capacity = wanted;
    }
    memcpy(*text + *length, piece, add + 1);
    *length += add;
    return 0;
}

mitilog_status rules_policy_finish(rules_policy *policy, mitilog_error *error)
{
    qsort(policy->rules, policy->rule_count, sizeof policy->rules[0], compare_rule);
    char *text = NULL;
    size_t length = 0, capacity = 0;
    char line[400], number[64], number2[64];
    rules_format_number(policy->closed_after_idle_minutes, number, sizeof number);
    rules_format_number(policy->gap_cap_seconds, number2, sizeof number2);
    /* index_source appears only when it is not the default, so that the
     * versions of policies written before it existed do not change. */
    snprintf(line, sizeof line,
             "[policy]\nclosed_after_idle_minutes = %s\ngap_cap_seconds = %s\n%sname = %s\n",
             number, number2, policy->index_source_header ? "index_source = header\n" : "",
             policy->name ? policy->name : "");
    int failed = append_text(&text, &length, &capacity, line);
    for (size_t i = 0; i < policy->rule_count && !failed; i++) {
        rules_rule *rule = &policy->rules[i];
        failed = build_settings(rule);
        snprintf(line, sizeof line, "[rule %s]\n", rule->id);
        failed = failed || append_text(&text, &length, &capacity, line);
        for (size_t s = 0; s < rule->setting_count && !failed; s++) {
            failed = append_text(&text, &length, &capacity, rule->settings[s].key) ||
                     append_text(&text, &length, &capacity, " = ") ||
                     append_text(&text, &length, &capacity, rule->settings[s].value) ||
                     append_text(&text, &length, &capacity, "\n");
        }
    }
    if (failed || hash_text_hex(text, policy->version) != MITILOG_OK) {
        free(text);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    policy->normalised = text;
    return MITILOG_OK;
}

const char *rules_policy_version(const rules_policy *policy) { return policy->version; }

const char *rules_policy_name(const rules_policy *policy) { return policy->name; }

const char *rules_policy_normalised(const rules_policy *policy) { return policy->normalised; }

double rules_policy_closed_after_idle_minutes(const rules_policy *policy)
{
    return policy->closed_after_idle_minutes;
}

const char *rules_policy_index_source(const rules_policy *policy)
{
    return policy != NULL && policy->index_source_header ? "header" : "screen";
}

double rules_policy_gap_cap_seconds(const rules_policy *policy) { return policy->gap_cap_seconds; }

size_t rules_policy_rule_count(const rules_policy *policy) { return policy->rule_count; }

int rules_policy_rule_at(const rules_policy *policy, size_t index, exam_rule_info *info)
{
    if (index >= policy->rule_count)
        return -1;
    const rules_rule *rule = &policy->rules[index];
    info->id = rule->id;
    info->kind = rules_kind_name(rule->kind);
    info->severity = rule->severity;
    info->enabled = rule->enabled;
    info->source = rule->source;
    info->description = kind_descriptions[rule->kind];
    info->settings = rule->settings;
    info->setting_count = rule->setting_count;
    return 0;
}

static void selectors_free(rules_selector *list, size_t count)
{
    for (size_t i = 0; i < count; i++)
        free(list[i].category);
}

void rules_policy_free(rules_policy *policy)
{
    if (policy == NULL)
        return;
    for (size_t i = 0; i < policy->rule_count; i++) {
        rules_rule *rule = &policy->rules[i];
        free(rule->id);
        free(rule->source);
        selectors_free(rule->applies, rule->applies_count);
        selectors_free(rule->excepts, rule->except_count);
        for (size_t l = 0; l < rule->limit_count; l++) {
            free(rule->limits[l].base);
            free(rule->limits[l].selector.category);
        }
        free(rule->limits);
        for (size_t k = 0; k < rule->seen_count; k++)
            free(rule->seen_keys[k]);
        free(rule->seen_keys);
        for (size_t s = 0; s < rule->setting_count; s++) {
            free((char *)rule->settings[s].key);
            free((char *)rule->settings[s].value);
        }
        free(rule->settings);
    }
    free(policy->rules);
    free(policy->name);
    free(policy->normalised);
    free(policy);
}
