/* Parsing a policy file with inih (syntax: docs/policy.md). */
#include <errno.h>
#include <ini.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "rules/rules_internal.h"

typedef struct parse_state {
    rules_policy *policy;
    const char *name;
    const char *text; /* the whole file */
    size_t offset;
    int line_number;
    int previous_complete;
    int continuation; /* the current line starts with white space */
    int header_line;  /* line of the last [section] header */
    char last_section[128];
    char last_key[128];
    mitilog_status status;
    mitilog_error *error;
    int error_line;
    int unknown_rule_line; /* header line of an unknown rule, said once */
} parse_state;

/* inih asks for one line per call; counting here gives messages a line
 * number (Debian's inih does not pass it to handlers). */
static char *read_line(char *buffer, int size, void *stream)
{
    parse_state *state = stream;
    if (state->text[state->offset] == '\0' || size < 2)
        return NULL;
    int length = 0;
    while (length < size - 1 && state->text[state->offset] != '\0') {
        char c = state->text[state->offset++];
        buffer[length++] = c;
        if (c == '\n')
            break;
    }
    buffer[length] = '\0';
    state->line_number += state->previous_complete;
    state->previous_complete = strchr(buffer, '\n') != NULL;
    state->continuation = buffer[0] == ' ' || buffer[0] == '\t';
    const char *start = buffer + strspn(buffer, " \t");
    if (*start == '[')
        state->header_line = state->line_number;
    return buffer;
}

/* Records one problem (every problem of the file is reported, one line
 * each) and returns 0: the entry is not taken. */
static int fail(parse_state *state, mitilog_status status, const char *section, const char *key,
                const char *reason)
{
    if (state->status == MITILOG_OK) {
        state->error_line = state->line_number;
        state->status = status;
    }
    mitilog_error_append(state->error, status, "%s:%d: [%s] %s: %s", state->name,
                         state->line_number, section, key, reason);
    return 0;
}

static int parse_number(const char *text, double *value)
{
    char *end = NULL;
    errno = 0;
    double number = strtod(text, &end);
    if (text[0] == '\0' || *end != '\0' || errno != 0 || !isfinite(number) || number < 0)
        return -1;
    *value = number;
    return 0;
}

static int parse_yes_no(const char *text, int *value)
{
    if (strcasecmp(text, "yes") == 0 || strcasecmp(text, "true") == 0 || strcmp(text, "1") == 0)
        *value = 1;
    else if (strcasecmp(text, "no") == 0 || strcasecmp(text, "false") == 0 ||
             strcmp(text, "0") == 0)
        *value = 0;
    else
        return -1;
    return 0;
}

static int valid_category(const char *name)
{
    if (name[0] == '\0')
        return 0;
    for (const char *p = name; *p; p++) {
        if (!((*p >= 'a' && *p <= 'z') || (*p >= '0' && *p <= '9') || *p == '_' || *p == '-'))
            return 0;
    }
    return 1;
}

/* "group.obstetric", "age.neonate", "category.neonatal_lung". */
static int parse_selector(const char *text, rules_selector *selector)
{
    memset(selector, 0, sizeof *selector);
    const char *dot = strchr(text, '.');
    if (dot == NULL)
        return -1;
    const char *name = dot + 1;
    size_t kind_length = (size_t)(dot - text);
    if (kind_length == 5 && strncmp(text, "group", 5) == 0) {
        exam_group group;
        if (exam_group_parse(name, &group) != 0)
            return -1;
        selector->kind = RULES_SELECT_GROUP;
        selector->value = (int)group;
    } else if (kind_length == 3 && strncmp(text, "age", 3) == 0) {
        rules_age age;
        if (rules_age_parse(name, &age) != 0)
            return -1;
        selector->kind = RULES_SELECT_AGE;
        selector->value = (int)age;
    } else if (kind_length == 8 && strncmp(text, "category", 8) == 0 && valid_category(name)) {
        selector->kind = RULES_SELECT_CATEGORY;
        selector->category = strdup(name);
        if (selector->category == NULL)
            return -2;
    } else {
        return -1;
    }
    return 0;
}

/* Why a selector (KIND SEPARATOR NAME) was refused, naming what exists. */
static void selector_reason(const char *text, char separator, char *reason, size_t size)
{
    const char *mark = strchr(text, separator);
    size_t kind_length = mark != NULL ? (size_t)(mark - text) : strlen(text);
    const char *name = mark != NULL ? mark + 1 : "";
    char names[200] = "";
    size_t used = 0;
    int is_group = kind_length == 5 && strncmp(text, "group", 5) == 0;
    int is_age = kind_length == 3 && strncmp(text, "age", 3) == 0;
    int count = is_group ? EXAM_GROUP_COUNT : is_age ? RULES_AGE_COUNT : 0;
    for (int i = 0; i < count; i++) {
        const char *known =
            is_group ? exam_group_name((exam_group)i) : rules_age_name((rules_age)i);
        int n = snprintf(names + used, sizeof names - used, "%s%s", i ? ", " : "", known);
        if (n > 0 && (size_t)n < sizeof names - used)
            used += (size_t)n;
    }
    if (count > 0)
        snprintf(reason, size, "'%.60s' is not a%s %s; the %s are %s", name, is_age ? "n" : "",
                 is_group ? "group" : "age group", is_group ? "groups" : "age groups", names);
    else if (kind_length == 8 && strncmp(text, "category", 8) == 0)
        snprintf(reason, size,
                 "'%.60s' is not an exam type key (lower-case letters, digits, _ and -)", name);
    else
        snprintf(reason, size, "'%.100s' is not group%cNAME, age%cNAME or category%cNAME", text,
                 separator, separator, separator);
}

/* "group:obstetric, age:neonate" (applies / except). */
static int parse_selector_list(parse_state *state, const char *section, const char *key,
                               const char *value, rules_selector *list, size_t *count)
{
    char copy[1024];
    snprintf(copy, sizeof copy, "%s", value);
    char *saveptr = NULL;
    for (char *item = strtok_r(copy, ", ", &saveptr); item; item = strtok_r(NULL, ", ", &saveptr)) {
        char *colon = strchr(item, ':');
        if (colon != NULL)
            *colon = '.';
        if (*count >= RULES_MAX_SELECTORS)
            return fail(state, MITILOG_ERROR_INVALID, section, key, "too many entries");
        int rc = colon ? parse_selector(item, &list[*count]) : -1;
        if (rc == -2)
            return fail(state, MITILOG_ERROR_MEMORY, section, key, "out of memory");
        if (rc != 0) {
            char reason[400];
            if (colon)
                *colon = ':';
            selector_reason(item, ':', reason, sizeof reason);
            return fail(state, MITILOG_ERROR_INVALID, section, key, reason);
        }
        (*count)++;
    }
    return 1;
}

static const char *const limit_bases[RULES_KIND_COUNT][3] = {
    [RULES_KIND_TI_CEILING] = {"limit"},
    [RULES_KIND_MI_CEILING] = {"limit"},
    [RULES_KIND_EQUIPMENT_MAXIMA] = {"mi_limit", "ti_limit"},
    [RULES_KIND_FIRST_TRIMESTER_DOPPLER] = {"ti_limit", "doppler_minutes_limit"},
    [RULES_KIND_THERMAL_DOSE] = {"limit"},
    [RULES_KIND_EXAM_DURATION] = {"limit"},
};

static int handle_limit(parse_state *state, rules_rule *rule, const char *section, const char *key,
                        const char *value)
{
    const char *base = NULL;
    size_t base_length = 0;
    for (size_t i = 0; i < 3 && limit_bases[rule->kind][i]; i++) {
        size_t length = strlen(limit_bases[rule->kind][i]);
        if (strncmp(key, limit_bases[rule->kind][i], length) == 0 &&
            (key[length] == '\0' || key[length] == '.')) {
            base = limit_bases[rule->kind][i];
            base_length = length;
        }
    }
    if (base == NULL)
        return -1; /* not a limit key */
    rules_limit limit;
    memset(&limit, 0, sizeof limit);
    if (key[base_length] == '.') {
        int rc = parse_selector(key + base_length + 1, &limit.selector);
        if (rc == -2)
            return fail(state, MITILOG_ERROR_MEMORY, section, key, "out of memory");
        if (rc != 0) {
            char reason[400];
            selector_reason(key + base_length + 1, '.', reason, sizeof reason);
            return fail(state, MITILOG_ERROR_INVALID, section, key, reason);
        }
    }
    if (strcasecmp(value, "off") == 0) {
        limit.off = 1;
    } else if (parse_number(value, &limit.value) != 0) {
        free(limit.selector.category);
        char reason[300];
        snprintf(reason, sizeof reason, "'%.200s' is not a number >= 0 or off", value);
        return fail(state, MITILOG_ERROR_INVALID, section, key, reason);
    }
    limit.base = strdup(base);
    rules_limit *grown = realloc(rule->limits, (rule->limit_count + 1) * sizeof *grown);
    if (limit.base == NULL || grown == NULL) {
        free(limit.base);
        free(limit.selector.category);
        if (grown)
            rule->limits = grown;
        return fail(state, MITILOG_ERROR_MEMORY, section, key, "out of memory");
    }
    rule->limits = grown;
    rule->limits[rule->limit_count++] = limit;
    return 1;
}

static int handle_dwell(parse_state *state, rules_rule *rule, const char *section, const char *key,
                        const char *value)
{
    exam_dwell_step step = {0, 0, 0};
    char reason[300];
    if (parse_number(key + strlen("dwell."), &step.threshold) != 0)
        return fail(state, MITILOG_ERROR_INVALID, section, key,
                    "the threshold after 'dwell.' is not a number");
    if (strcasecmp(value, "not_recommended") == 0) {
        step.not_recommended = 1;
    } else if (parse_number(value, &step.minutes) != 0) {
        snprintf(reason, sizeof reason, "'%.200s' is not minutes >= 0 or not_recommended", value);
        return fail(state, MITILOG_ERROR_INVALID, section, key, reason);
    }
    if (rule->step_count >= EXAM_MAX_DWELL_STEPS)
        return fail(state, MITILOG_ERROR_INVALID, section, key, "too many thresholds");
    size_t at = rule->step_count;
    for (size_t i = 0; i < rule->step_count; i++) {
        if (rule->steps[i].threshold == step.threshold)
            return fail(state, MITILOG_ERROR_INVALID, section, key, "threshold set twice");
    }
    while (at > 0 && rule->steps[at - 1].threshold > step.threshold) {
        rule->steps[at] = rule->steps[at - 1];
        at--;
    }
    rule->steps[at] = step;
    rule->step_count++;
    return 1;
}

static int rule_kind_from_id(const char *id, rules_kind *kind)
{
    for (int k = 0; k < RULES_KIND_COUNT; k++) {
        if (k != RULES_KIND_DWELL && strcmp(id, rules_kind_name((rules_kind)k)) == 0) {
            *kind = (rules_kind)k;
            return 0;
        }
    }
    if (strncmp(id, "dwell_", 6) == 0 && valid_category(id + 6)) {
        *kind = RULES_KIND_DWELL;
        return 0;
    }
    return -1;
}

static rules_rule *find_or_add_rule(parse_state *state, const char *section)
{
    const char *id = section + strlen("rule ");
    rules_policy *policy = state->policy;
    for (size_t i = 0; i < policy->rule_count; i++) {
        if (strcmp(policy->rules[i].id, id) == 0)
            return &policy->rules[i];
    }
    rules_kind kind;
    if (rule_kind_from_id(id, &kind) != 0)
        return NULL;
    rules_rule *grown = realloc(policy->rules, (policy->rule_count + 1) * sizeof *grown);
    if (grown == NULL)
        return NULL;
    policy->rules = grown;
    rules_rule *rule = &policy->rules[policy->rule_count];
    memset(rule, 0, sizeof *rule);
    rule->id = strdup(id);
    if (rule->id == NULL)
        return NULL;
    policy->rule_count++;
    rule->kind = kind;
    rule->enabled = 1;
    rule->before_weeks = 14;
    rule->minimum_instances = 1;
    rule->line = state->header_line;
    return rule;
}

/* A key seen again, not as an inih continuation line, is an error. */
static int note_key(parse_state *state, rules_rule *rule, const char *section, const char *key)
{
    for (size_t i = 0; i < rule->seen_count; i++) {
        if (strcmp(rule->seen_keys[i], key) == 0)
            return fail(state, MITILOG_ERROR_INVALID, section, key, "set twice");
    }
    char **grown = realloc(rule->seen_keys, (rule->seen_count + 1) * sizeof *grown);
    if (grown == NULL)
        return fail(state, MITILOG_ERROR_MEMORY, section, key, "out of memory");
    rule->seen_keys = grown;
    if ((rule->seen_keys[rule->seen_count] = strdup(key)) == NULL)
        return fail(state, MITILOG_ERROR_MEMORY, section, key, "out of memory");
    rule->seen_count++;
    return 1;
}

static int append_source(parse_state *state, rules_rule *rule, const char *section, const char *key,
                         const char *value)
{
    size_t old_length = rule->source ? strlen(rule->source) : 0;
    char *grown = realloc(rule->source, old_length + strlen(value) + 2);
    if (grown == NULL)
        return fail(state, MITILOG_ERROR_MEMORY, section, key, "out of memory");
    if (old_length == 0)
        grown[0] = '\0';
    else
        strcat(grown, " ");
    strcat(grown, value);
    rule->source = grown;
    return 1;
}

static int handle_rule_key(parse_state *state, rules_rule *rule, const char *section,
                           const char *key, const char *value, int continued)
{
    if (continued) {
        if (strcmp(key, "source") == 0)
            return append_source(state, rule, section, key, value);
        return fail(state, MITILOG_ERROR_PARSE, section, key,
                    "only source may continue on an indented line");
    }
    if (!note_key(state, rule, section, key))
        return 0;
    char reason[300];
    if (strcmp(key, "severity") == 0 || strcmp(key, "severity_over_limit") == 0) {
        exam_severity severity;
        if (exam_severity_parse(value, &severity) != 0) {
            snprintf(reason, sizeof reason, "'%.200s' is not advisory, warning or violation",
                     value);
            return fail(state, MITILOG_ERROR_INVALID, section, key, reason);
        }
        if (key[8] == '\0') {
            rule->severity = severity;
            rule->has_severity = 1;
            return 1;
        }
        if (rule->kind != RULES_KIND_FIRST_TRIMESTER_DOPPLER)
            return fail(state, MITILOG_ERROR_INVALID, section, key, "unknown key");
        rule->severity_over_limit = severity;
        rule->has_severity_over_limit = 1;
        return 1;
    }
    if (strcmp(key, "enabled") == 0) {
        if (parse_yes_no(value, &rule->enabled) != 0)
            return fail(state, MITILOG_ERROR_INVALID, section, key, "expected yes or no");
        return 1;
    }
    if (strcmp(key, "source") == 0) {
        if (value[0] == '\0')
            return fail(state, MITILOG_ERROR_INVALID, section, key, "empty");
        return append_source(state, rule, section, key, value);
    }
    if (strcmp(key, "applies") == 0)
        return parse_selector_list(state, section, key, value, rule->applies, &rule->applies_count);
    if (strcmp(key, "except") == 0)
        return parse_selector_list(state, section, key, value, rule->excepts, &rule->except_count);
    if (rule->kind == RULES_KIND_DWELL && strncmp(key, "dwell.", 6) == 0)
        return handle_dwell(state, rule, section, key, value);
    if (rule->kind == RULES_KIND_FIRST_TRIMESTER_DOPPLER && strcmp(key, "before_weeks") == 0) {
        if (parse_number(value, &rule->before_weeks) != 0 || rule->before_weeks > 45)
            return fail(state, MITILOG_ERROR_INVALID, section, key, "expected weeks 0..45");
        return 1;
    }
    if (rule->kind == RULES_KIND_OUTPUT_NOT_REPORTED && strcmp(key, "minimum_instances") == 0) {
        double number;
        if (parse_number(value, &number) != 0 || number < 1 || number > 1e6 ||
            number != floor(number))
            return fail(state, MITILOG_ERROR_INVALID, section, key,
                        "expected a whole number 1..1000000");
        rule->minimum_instances = (unsigned)number;
        return 1;
    }
    int rc = handle_limit(state, rule, section, key, value);
    if (rc >= 0)
        return rc;
    return fail(state, MITILOG_ERROR_INVALID, section, key, "unknown key");
}

static int handle_policy_key(parse_state *state, const char *section, const char *key,
                             const char *value)
{
    rules_policy *policy = state->policy;
    if (strcmp(key, "name") == 0) {
        free(policy->name);
        if ((policy->name = strdup(value)) == NULL)
            return fail(state, MITILOG_ERROR_MEMORY, section, key, "out of memory");
        return 1;
    }
    if (strcmp(key, "index_source") == 0) {
        if (strcmp(value, "screen") != 0 && strcmp(value, "header") != 0)
            return fail(state, MITILOG_ERROR_INVALID, section, key,
                        "must be screen (the value the screen showed wins when the header "
                        "has one too) or header");
        policy->index_source_header = strcmp(value, "header") == 0;
        return 1;
    }
    double *target = NULL;
    double maximum = 0;
    if (strcmp(key, "closed_after_idle_minutes") == 0) {
        target = &policy->closed_after_idle_minutes;
        maximum = 10080;
    } else if (strcmp(key, "gap_cap_seconds") == 0) {
        target = &policy->gap_cap_seconds;
        maximum = 86400;
    } else {
        return fail(state, MITILOG_ERROR_INVALID, section, key, "unknown key");
    }
    double number;
    if (parse_number(value, &number) != 0 || number <= 0 || number > maximum) {
        char reason[300];
        snprintf(reason, sizeof reason, "'%.200s' is not a number in (0, %.0f]", value, maximum);
        return fail(state, MITILOG_ERROR_INVALID, section, key, reason);
    }
    *target = number;
    return 1;
}

static int handle_entry_checked(parse_state *state, const char *section, const char *key,
                                const char *value);

/* Every entry is looked at, so that one run reports every problem. */
static int handle_entry(void *user, const char *section, const char *key, const char *value)
{
    handle_entry_checked(user, section, key, value);
    return 1;
}

static int handle_entry_checked(parse_state *state, const char *section, const char *key,
                                const char *value)
{
    int continued = state->continuation && strcmp(section, state->last_section) == 0 &&
                    strcmp(key, state->last_key) == 0;
    snprintf(state->last_section, sizeof state->last_section, "%s", section);
    snprintf(state->last_key, sizeof state->last_key, "%s", key);
    if (strcmp(section, "policy") == 0) {
        if (continued)
            return fail(state, MITILOG_ERROR_PARSE, section, key, "unexpected indented line");
        return handle_policy_key(state, section, key, value);
    }
    if (strncmp(section, "rule ", 5) != 0)
        return fail(state, MITILOG_ERROR_INVALID, section, key,
                    "unknown section (expected [policy] or [rule ID])");
    rules_rule *rule = find_or_add_rule(state, section);
    if (rule == NULL) {
        rules_kind kind;
        if (rule_kind_from_id(section + 5, &kind) == 0)
            return fail(state, MITILOG_ERROR_MEMORY, section, key, "out of memory");
        if (state->unknown_rule_line == state->header_line)
            return 0; /* said once, at the section */
        state->unknown_rule_line = state->header_line;
        char names[300] = "";
        size_t used = 0;
        for (int k = 0; k < RULES_KIND_COUNT; k++) {
            const char *known =
                k == RULES_KIND_DWELL ? "dwell_NAME" : rules_kind_name((rules_kind)k);
            int n = snprintf(names + used, sizeof names - used, "%s%s", k ? ", " : "", known);
            if (n > 0 && (size_t)n < sizeof names - used)
                used += (size_t)n;
        }
        if (state->status == MITILOG_OK) {
            state->status = MITILOG_ERROR_INVALID;
            state->error_line = state->header_line;
        }
        mitilog_error_append(state->error, MITILOG_ERROR_INVALID,
                             "%s:%d: [%s]: '%s' is not a rule; the rules are %s "
                             "(docs/policy.md)",
                             state->name, state->header_line, section, section + 5, names);
        return 0;
    }
    return handle_rule_key(state, rule, section, key, value, continued);
}

/* Every rule needs a severity and a source; dwell rules a threshold. */
static mitilog_status check_complete(const rules_policy *policy, const char *name,
                                     mitilog_error *error)
{
    mitilog_status status = MITILOG_OK;
    for (size_t i = 0; i < policy->rule_count; i++) {
        const rules_rule *rule = &policy->rules[i];
        const char *missing = !rule->has_severity    ? "severity"
                              : rule->source == NULL ? "source"
                              : rule->kind == RULES_KIND_DWELL && rule->step_count == 0
                                  ? "dwell.THRESHOLD"
                                  : NULL;
        if (missing)
            status =
                mitilog_error_append(error, MITILOG_ERROR_INVALID, "%s:%d: [rule %s] %s: missing",
                                     name, rule->line, rule->id, missing);
    }
    return status;
}

mitilog_status rules_policy_load_text(const char *text, const char *name, rules_policy **policy,
                                      mitilog_error *error)
{
    *policy = NULL;
    rules_policy *parsed = calloc(1, sizeof *parsed);
    if (parsed == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    parsed->closed_after_idle_minutes = 60;
    parsed->gap_cap_seconds = EXT_TIMELINE_DEFAULT_GAP_CAP_SECONDS;
    parse_state state;
    memset(&state, 0, sizeof state);
    state.policy = parsed;
    state.name = name;
    state.text = text;
    state.previous_complete = 1;
    state.status = MITILOG_OK;
    state.error = error;
    if (error != NULL)
        error->text[0] = '\0';
    int result = ini_parse_stream(read_line, &state, handle_entry, &state);
    mitilog_status status = state.status;
    if (result > 0)
        status = mitilog_error_append(error, MITILOG_ERROR_PARSE,
                                      "%s:%d: syntax error (expected [section] or key = value)",
                                      name, result);
    else if (result < 0)
        status = mitilog_error_append(error, MITILOG_ERROR_MEMORY, "%s: cannot be parsed", name);
    mitilog_status complete = check_complete(parsed, name, error);
    if (status == MITILOG_OK)
        status = complete;
    if (status == MITILOG_OK)
        status = rules_policy_finish(parsed, error);
    if (status != MITILOG_OK) {
        rules_policy_free(parsed);
        return status;
    }
    *policy = parsed;
    return MITILOG_OK;
}

mitilog_status rules_policy_load(const char *path, rules_policy **policy, mitilog_error *error)
{
    *policy = NULL;
    FILE *file = fopen(path, "rb");
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", path, strerror(errno));
    char *text = NULL;
    size_t length = 0, capacity = 0;
    mitilog_status status = MITILOG_OK;
    for (;;) {
        if (length + 4096 + 1 > capacity) {
            capacity = capacity ? capacity * 2 : 8192;
            char *grown = realloc(text, capacity);
            if (grown == NULL || capacity > (1u << 24)) {
                free(grown ? grown : text);
                text = NULL;
                status = grown ? mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                                   "%s: larger than 16 MiB", path)
                               : mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
                break;
            }
            text = grown;
        }
        size_t got = fread(text + length, 1, 4096, file);
        length += got;
        if (got < 4096)
            break;
    }
    if (status == MITILOG_OK && ferror(file))
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "%s: cannot be read", path);
    fclose(file);
    if (status == MITILOG_OK) {
        text[length] = '\0';
        if (strlen(text) != length)
            status = mitilog_error_set(error, MITILOG_ERROR_PARSE, "%s: contains a NUL byte", path);
        else
            status = rules_policy_load_text(text, path, policy, error);
    }
    free(text);
    return status;
}
