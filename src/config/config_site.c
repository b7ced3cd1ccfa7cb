/* The site file parser (config_site.h). */
#include "config/config_site.h"

#include <errno.h>
#include <ini.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

typedef enum site_section {
    SECTION_NONE,
    SECTION_EXAM_TYPE,
    SECTION_ROOMS,
    SECTION_ROOMS_BY_AE,
    SECTION_SHIFT,
    SECTION_AGE_GROUPS,
    SECTION_EXTRACTION,
    SECTION_SR_CODES,
    SECTION_TIMELINE,
    SECTION_REFUSED /* its header was reported: its keys are skipped */
} site_section;

typedef struct site_state {
    ext_site_rules *rules;
    const char *path;
    FILE *file;
    int line_number, previous_complete, error_line;
    mitilog_status status;
    mitilog_error *error;
    char section_name[160];
    site_section section;
    ext_exam_type *exam_type;
    ext_shift *shift;
    int fields[EXT_FIELD_COUNT]; /* the exam type's "fields", in order */
    size_t field_count;
} site_state;

/* Debian's inih passes no line numbers: count them (as config.c does). */
static char *site_read_line(char *buffer, int size, void *stream)
{
    site_state *state = stream;
    char *line = fgets(buffer, size, state->file);
    if (line != NULL) {
        state->line_number += state->previous_complete;
        state->previous_complete = strchr(line, '\n') != NULL;
    }
    return line;
}

/* Records one problem; every problem of the file is reported, a line each. */
static int site_fail(site_state *state, const char *key, const char *reason)
{
    if (state->status == MITILOG_OK) {
        state->error_line = state->line_number;
        state->status = MITILOG_ERROR_INVALID;
    }
    mitilog_error_append(state->error, MITILOG_ERROR_INVALID, "%s:%d: [%s] %s: %s", state->path,
                         state->line_number, state->section_name, key, reason);
    return 0;
}

static int parse_yes_no(const char *value, int *out)
{
    if (strcasecmp(value, "yes") == 0 || strcasecmp(value, "true") == 0 || strcmp(value, "1") == 0)
        return *out = 1, 0;
    if (strcasecmp(value, "no") == 0 || strcasecmp(value, "false") == 0 || strcmp(value, "0") == 0)
        return *out = 0, 0;
    return -1;
}

static int parse_unsigned(const char *value, unsigned long low, unsigned long high,
                          unsigned long *out)
{
    char *end = NULL;
    errno = 0;
    unsigned long number = strtoul(value, &end, 10);
    if (value[0] < '0' || value[0] > '9' || *end != '\0' || errno != 0 || number < low ||
        number > high)
        return -1;
    *out = number;
    return 0;
}

/* The default "fields" of an exam type: the free-text ones, in this
 * order; body_part_examined and image_type_3 (defined terms) only through
 * match_body_part_examined / match_image_type_3. */
static void set_all_fields(site_state *state)
{
    static const int text_fields[] = {EXT_FIELD_STUDY_DESCRIPTION, EXT_FIELD_PROTOCOL_NAME,
                                      EXT_FIELD_PERFORMED_PROCEDURE_STEP_DESCRIPTION,
                                      EXT_FIELD_PROCEDURE_CODE, EXT_FIELD_SERIES_DESCRIPTION};
    for (size_t i = 0; i < sizeof text_fields / sizeof text_fields[0]; i++)
        state->fields[i] = text_fields[i];
    state->field_count = sizeof text_fields / sizeof text_fields[0];
}

static int begin_section(site_state *state, const char *section)
{
    snprintf(state->section_name, sizeof state->section_name, "%s", section);
    state->exam_type = NULL;
    state->shift = NULL;
    set_all_fields(state);
    const char *space = strchr(section, ' ');
    const char *name = space != NULL ? space + 1 : "";
    size_t word = space != NULL ? (size_t)(space - section) : strlen(section);
    mitilog_error error;
    if (word == 9 && strncmp(section, "exam_type", 9) == 0) {
        state->section = SECTION_EXAM_TYPE;
        if (ext_site_add_exam_type(state->rules, name, &state->exam_type, &error) != MITILOG_OK)
            return site_fail(state, "(section)", error.text);
    } else if (word == 5 && strncmp(section, "shift", 5) == 0) {
        state->section = SECTION_SHIFT;
        if (name[0] == '\0')
            return site_fail(state, "(section)", "write [shift NAME]");
        if (ext_site_add_shift(state->rules, name, &state->shift, &error) != MITILOG_OK)
            return site_fail(state, "(section)", error.text);
    } else if (space == NULL && strcmp(section, "rooms") == 0) {
        state->section = SECTION_ROOMS;
    } else if (space == NULL && strcmp(section, "room_by_calling_ae") == 0) {
        state->section = SECTION_ROOMS_BY_AE;
    } else if (space == NULL && strcmp(section, "age_groups") == 0) {
        state->section = SECTION_AGE_GROUPS;
    } else if (space == NULL && strcmp(section, "extraction") == 0) {
        state->section = SECTION_EXTRACTION;
    } else if (space == NULL && strcmp(section, "sr_codes") == 0) {
        state->section = SECTION_SR_CODES;
    } else if (space == NULL && strcmp(section, "timeline") == 0) {
        state->section = SECTION_TIMELINE;
    } else {
        return site_fail(state, "(section)", "unknown section");
    }
    return 1;
}

static int set_fields(site_state *state, const char *value)
{
    char copy[512];
    snprintf(copy, sizeof copy, "%s", value);
    state->field_count = 0;
    char *saved = NULL;
    for (char *item = strtok_r(copy, ", ", &saved); item != NULL;
         item = strtok_r(NULL, ", ", &saved)) {
        int field = ext_field_from_name(item);
        if (field < 0 || state->field_count == EXT_FIELD_COUNT) {
            char reason[300];
            snprintf(reason, sizeof reason,
                     "'%.60s' is not one of study_description, "
                     "protocol_name, performed_procedure_step_description, procedure_code, "
                     "body_part_examined, image_type_3, series_description",
                     item);
            return site_fail(state, "fields", reason);
        }
        state->fields[state->field_count++] = field;
    }
    if (state->field_count == 0)
        return site_fail(state, "fields", "no field given");
    return 1;
}

static int exam_type_entry(site_state *state, const char *key, const char *value)
{
    ext_exam_type *type = state->exam_type;
    mitilog_error error;
    unsigned long number;
    if (strcmp(key, "label") == 0) {
        char *copy = strdup(value);
        if (copy == NULL)
            return site_fail(state, key, "out of memory");
        free(type->label);
        type->label = copy;
    } else if (strcmp(key, "governing_index") == 0) {
        if (strcasecmp(value, "TIS") == 0)
            type->governing = EXAM_GOVERNING_TIS;
        else if (strcasecmp(value, "TIB") == 0)
            type->governing = EXAM_GOVERNING_TIB;
        else if (strcasecmp(value, "TIC") == 0)
            type->governing = EXAM_GOVERNING_TIC;
        else if (strcasecmp(value, "by_gestation") == 0) {
            type->governing = EXAM_GOVERNING_BY_GESTATION;
            type->obstetric = 1;
        } else
            return site_fail(state, key, "not TIS, TIB, TIC or by_gestation");
    } else if (strcmp(key, "obstetric") == 0) {
        if (parse_yes_no(value, &type->obstetric) != 0)
            return site_fail(state, key, "not yes or no");
    } else if (strcmp(key, "trimester") == 0) {
        if (parse_unsigned(value, 1, 3, &number) != 0)
            return site_fail(state, key, "not 1, 2 or 3");
        type->trimester = (int)number;
        type->obstetric = 1;
    } else if (strcmp(key, "nominal_gestational_age_weeks") == 0) {
        if (parse_unsigned(value, 1, 45, &number) != 0)
            return site_fail(state, key, "not a whole number of weeks from 1 to 45");
        type->nominal_gestational_age_weeks = (double)number;
    } else if (strcmp(key, "group") == 0) {
        exam_group group;
        if (exam_group_parse(value, &group) != 0)
            return site_fail(state, key,
                             "not general, obstetric, neonatal, transcranial, "
                             "ophthalmic or contrast");
        type->group = group;
        type->has_group = 1;
    } else if (strcmp(key, "fields") == 0) {
        return set_fields(state, value);
    } else if (strcmp(key, "match") == 0) {
        for (size_t i = 0; i < state->field_count; i++)
            if (ext_site_add_match(type, (ext_field)state->fields[i], value, &error) != MITILOG_OK)
                return site_fail(state, key, error.text);
    } else if (strncmp(key, "match_", 6) == 0) {
        int field = ext_field_from_name(key + 6);
        if (field < 0)
            return site_fail(state, key, "unknown field after match_");
        if (ext_site_add_match(type, (ext_field)field, value, &error) != MITILOG_OK)
            return site_fail(state, key, error.text);
    } else {
        return site_fail(state, key, "unknown key");
    }
    return 1;
}

static int other_entry(site_state *state, const char *key, const char *value)
{
    mitilog_error error;
    unsigned long number;
    switch (state->section) {
    case SECTION_ROOMS:
        if (ext_site_add_name(&state->rules->rooms, &state->rules->room_count, key, value,
                              &error) != MITILOG_OK)
            return site_fail(state, key, error.text);
        return 1;
    case SECTION_ROOMS_BY_AE:
        if (ext_site_add_name(&state->rules->rooms_by_ae, &state->rules->room_by_ae_count, key,
                              value, &error) != MITILOG_OK)
            return site_fail(state, key, error.text);
        return 1;
    case SECTION_SHIFT: {
        int minute = ext_site_parse_clock(value);
        if (strcmp(key, "from") != 0 && strcmp(key, "to") != 0)
            return site_fail(state, key, "unknown key (from, to)");
        if (minute < 0 || (strcmp(key, "from") == 0 && minute >= 24 * 60))
            return site_fail(state, key, "not a local time HH:MM");
        if (strcmp(key, "from") == 0)
            state->shift->from_minute = minute;
        else
            state->shift->to_minute = minute % (24 * 60);
        return 1;
    }
    case SECTION_AGE_GROUPS:
        if (strcmp(key, "neonate_max_days") == 0 && parse_unsigned(value, 0, 365, &number) == 0)
            state->rules->neonate_max_days = (unsigned)number;
        else if (strcmp(key, "child_max_years") == 0 && parse_unsigned(value, 0, 30, &number) == 0)
            state->rules->child_max_years = (unsigned)number;
        else
            return site_fail(state, key,
                             "unknown key, or not a whole number in range "
                             "(neonate_max_days 0-365, child_max_years 0-30)");
        return 1;
    case SECTION_EXTRACTION:
        if (strcmp(key, "preset_attribute") == 0) {
            if (ext_site_set_presets(state->rules, value, &error) != MITILOG_OK)
                return site_fail(state, key, error.text);
        } else if (strcmp(key, "record_operator") == 0) {
            if (parse_yes_no(value, &state->rules->record_operator) != 0)
                return site_fail(state, key, "not yes or no");
        } else {
            return site_fail(state, key, "unknown key (preset_attribute, record_operator)");
        }
        return 1;
    case SECTION_SR_CODES: {
        /* inih splits at the first '=' or ':', so "SCHEME:CODE = q" comes
         * as key "SCHEME", value "CODE = q": join them back. */
        char joined[256], target[128];
        const char *equals = strchr(value, '=');
        if (strchr(key, ':') == NULL && equals != NULL) {
            size_t code_length = (size_t)(equals - value);
            while (code_length > 0 && value[code_length - 1] == ' ')
                code_length--;
            const char *rest = equals + 1;
            while (*rest == ' ')
                rest++;
            snprintf(joined, sizeof joined, "%s:%.*s", key, (int)code_length, value);
            snprintf(target, sizeof target, "%s", rest);
        } else {
            snprintf(joined, sizeof joined, "%s", key);
            snprintf(target, sizeof target, "%s", value);
        }
        if (ext_site_add_sr_code(state->rules, joined, target, &error) != MITILOG_OK)
            return site_fail(state, joined, error.text);
        return 1;
    }
    case SECTION_TIMELINE:
        if (strcmp(key, "gap_cap_seconds") == 0 && parse_unsigned(value, 1, 86400, &number) == 0)
            state->rules->gap_cap_seconds = (double)number;
        else
            return site_fail(state, key, "unknown key, or not 1-86400 (gap_cap_seconds)");
        return 1;
    default: return site_fail(state, key, "entry outside a known section");
    }
}

static int site_entry(void *user, const char *section, const char *key, const char *value)
{
    site_state *state = user;
    if (strcmp(section, state->section_name) != 0 && !begin_section(state, section)) {
        state->section = SECTION_REFUSED;
        return 1;
    }
    if (state->section == SECTION_REFUSED)
        return 1;
    if (state->section == SECTION_EXAM_TYPE)
        exam_type_entry(state, key, value);
    else
        other_entry(state, key, value);
    return 1; /* go on: one run reports every problem */
}

static mitilog_status site_validate(const char *path, ext_site_rules *rules, mitilog_error *error)
{
    mitilog_status status = MITILOG_OK;
    for (size_t i = 0; i < rules->shift_count; i++)
        if (rules->shifts[i].from_minute < 0 || rules->shifts[i].to_minute < 0)
            status = mitilog_error_append(error, MITILOG_ERROR_INVALID,
                                          "%s: [shift %s] needs both from and to", path,
                                          rules->shifts[i].name);
    for (size_t i = 0; i < rules->exam_type_count; i++)
        if (rules->exam_types[i].match_count == 0)
            status = mitilog_error_append(error, MITILOG_ERROR_INVALID,
                                          "%s: [exam_type %s] has no match rule", path,
                                          rules->exam_types[i].key);
    return status;
}

mitilog_status config_site_load(const char *path, ext_site_rules *rules, mitilog_error *error)
{
    mitilog_status status = ext_site_rules_init(rules, error);
    if (status != MITILOG_OK || path == NULL || path[0] == '\0')
        return status;
    FILE *file = fopen(path, "r");
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "site rules %s: %s", path,
                                 strerror(errno));
    free(rules->source_path);
    rules->source_path = strdup(path);
    site_state state;
    memset(&state, 0, sizeof state);
    state.rules = rules;
    state.path = path;
    state.file = file;
    state.previous_complete = 1;
    state.status = MITILOG_OK;
    state.error = error;
    state.section_name[0] = '\0';
    set_all_fields(&state);
    if (error != NULL)
        error->text[0] = '\0';
    int result = ini_parse_stream(site_read_line, &state, site_entry, &state);
    fclose(file);
    if (result > 0)
        state.status = mitilog_error_append(
            error, MITILOG_ERROR_PARSE, "%s:%d: syntax error (expected [section] or key = value)",
            path, result);
    else if (result < 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%s: cannot be read", path);
    if (rules->source_path == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    mitilog_status valid = site_validate(path, rules, error);
    return state.status != MITILOG_OK ? state.status : valid;
}
