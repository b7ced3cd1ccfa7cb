/* The site rules: defaults, adding entries, freeing (ext_site.h). */
#include "extract/ext_site.h"

#include <ctype.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "extract/ext_classify.h"
#include "extract/ext_modes.h"

static const char *const field_names[EXT_FIELD_COUNT] = {
    "study_description", "protocol_name",      "performed_procedure_step_description",
    "procedure_code",    "body_part_examined", "image_type_3",
    "series_description"};

static const char *const quantity_names[EXT_QUANTITY_COUNT] = {
    "mi", "tis", "tib", "tic", "scan_time", "gestational_age"};

/* DICOM keywords accepted by preset_attribute, with their field. */
static const struct {
    const char *keyword;
    ext_field field;
} preset_keywords[] = {
    {"ProtocolName", EXT_FIELD_PROTOCOL_NAME},
    {"SeriesDescription", EXT_FIELD_SERIES_DESCRIPTION},
    {"StudyDescription", EXT_FIELD_STUDY_DESCRIPTION},
    {"PerformedProcedureStepDescription", EXT_FIELD_PERFORMED_PROCEDURE_STEP_DESCRIPTION},
};

const char *ext_field_name(ext_field field)
{
    if ((int)field < 0 || field >= EXT_FIELD_COUNT)
        return NULL;
    return field_names[field];
}

int ext_field_from_name(const char *name)
{
    for (int i = 0; name != NULL && i < EXT_FIELD_COUNT; i++)
        if (strcasecmp(name, field_names[i]) == 0)
            return i;
    return -1;
}

const char *ext_quantity_name(ext_quantity quantity)
{
    if ((int)quantity < 0 || quantity >= EXT_QUANTITY_COUNT)
        return NULL;
    return quantity_names[quantity];
}

int ext_quantity_from_name(const char *name)
{
    for (int i = 0; name != NULL && i < EXT_QUANTITY_COUNT; i++)
        if (strcasecmp(name, quantity_names[i]) == 0)
            return i;
    return -1;
}

/* Grows *array of *count elements of size by one zeroed element. */
static void *grow(void **array, size_t *count, size_t size)
{
    void *grown = realloc(*array, (*count + 1) * size);
    if (grown == NULL)
        return NULL;
    *array = grown;
    void *element = (char *)grown + *count * size;
    memset(element, 0, size);
    (*count)++;
    return element;
}

mitilog_status ext_site_rules_init(ext_site_rules *rules, mitilog_error *error)
{
    memset(rules, 0, sizeof *rules);
    rules->source_path = strdup("(built-in)");
    /* WHO: the neonatal period is the first 28 days of life [std: WHO
     * definition, from memory]. The child/adult boundary at the 16th
     * birthday is common practice, no source (paediatric services vary
     * from 16 to 18). */
    rules->classify_cache = ext_classify_cache_create();
    rules->neonate_max_days = 28;
    rules->child_max_years = 15;
    rules->presets[0].field = EXT_FIELD_PROTOCOL_NAME;
    rules->preset_count = 1;
    if (rules->source_path == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    /* [std: LOINC 18185-9 "Gestational age"] */
    return ext_site_add_sr_code(rules, "LN:18185-9", "gestational_age", error);
}

static void free_names(ext_name_map *maps, size_t count)
{
    for (size_t i = 0; i < count; i++) {
        free(maps[i].from);
        free(maps[i].to);
    }
    free(maps);
}

void ext_site_rules_free(ext_site_rules *rules)
{
    if (rules == NULL)
        return;
    for (size_t i = 0; i < rules->exam_type_count; i++) {
        ext_exam_type *type = &rules->exam_types[i];
        for (size_t m = 0; m < type->match_count; m++) {
            regfree(&type->matches[m].regex);
            free(type->matches[m].pattern);
        }
        free(type->matches);
        free(type->key);
        free(type->label);
    }
    free(rules->exam_types);
    ext_classify_cache_free(rules->classify_cache);
    free_names(rules->rooms, rules->room_count);
    free_names(rules->rooms_by_ae, rules->room_by_ae_count);
    for (size_t i = 0; i < rules->shift_count; i++)
        free(rules->shifts[i].name);
    free(rules->shifts);
    for (size_t i = 0; i < rules->sr_code_count; i++) {
        free(rules->sr_codes[i].scheme);
        free(rules->sr_codes[i].code);
    }
    free(rules->sr_codes);
    for (size_t i = 0; i < rules->preset_count; i++)
        free(rules->presets[i].private_creator);
    free(rules->source_path);
    memset(rules, 0, sizeof *rules);
}

mitilog_status ext_site_add_exam_type(ext_site_rules *rules, const char *key, ext_exam_type **out,
                                      mitilog_error *error)
{
    for (size_t i = 0; i < rules->exam_type_count; i++)
        if (strcasecmp(rules->exam_types[i].key, key) == 0)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "exam type '%s' defined twice",
                                     key);
    if (key[0] == '\0' || strlen(key) > 64 ||
        strspn(key, "abcdefghijklmnopqrstuvwxyz"
                    "0123456789_") != strlen(key))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "exam type key '%s': use 1-64 of a-z, 0-9, _", key);
    ext_exam_type *type = grow((void **)&rules->exam_types, &rules->exam_type_count, sizeof *type);
    if (type == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    type->key = strdup(key);
    type->label = strdup(key);
    if (type->key == NULL || type->label == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    *out = type;
    return MITILOG_OK;
}

mitilog_status ext_site_add_match(ext_exam_type *type, ext_field field, const char *pattern,
                                  mitilog_error *error)
{
    regex_t regex;
    int rc = regcomp(&regex, pattern, REG_EXTENDED | REG_ICASE | REG_NOSUB);
    if (rc != 0) {
        char message[160];
        regerror(rc, &regex, message, sizeof message);
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "bad regular expression '%.100s': %s", pattern, message);
    }
    ext_match *match = grow((void **)&type->matches, &type->match_count, sizeof *match);
    char *copy = strdup(pattern);
    if (match == NULL || copy == NULL) {
        regfree(&regex);
        free(copy);
        if (match != NULL)
            type->match_count--;
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    match->field = field;
    match->pattern = copy;
    match->regex = regex;
    return MITILOG_OK;
}

mitilog_status ext_site_add_name(ext_name_map **maps, size_t *count, const char *from,
                                 const char *to, mitilog_error *error)
{
    for (size_t i = 0; i < *count; i++) {
        if (strcasecmp((*maps)[i].from, from) == 0) {
            char *copy = strdup(to);
            if (copy == NULL)
                return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
            free((*maps)[i].to);
            (*maps)[i].to = copy;
            return MITILOG_OK;
        }
    }
    ext_name_map *map = grow((void **)maps, count, sizeof *map);
    if (map == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    map->from = strdup(from);
    map->to = strdup(to);
    if (map->from == NULL || map->to == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    return MITILOG_OK;
}

mitilog_status ext_site_add_sr_code(ext_site_rules *rules, const char *scheme_code,
                                    const char *target, mitilog_error *error)
{
    const char *colon = strchr(scheme_code, ':');
    if (colon == NULL || colon == scheme_code || colon[1] == '\0' || strlen(scheme_code) > 96)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "'%.100s' is not SCHEME:CODE",
                                 scheme_code);
    int is_mode = strncasecmp(target, "mode:", 5) == 0;
    int value = is_mode ? exam_mode_from_name(target + 5) : ext_quantity_from_name(target);
    if (value < 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "'%.60s' is not mi, tis, tib, tic, scan_time, "
                                 "gestational_age or mode:NAME",
                                 target);
    size_t scheme_length = (size_t)(colon - scheme_code);
    for (size_t i = 0; i < rules->sr_code_count; i++) {
        ext_sr_code *code = &rules->sr_codes[i];
        if (strlen(code->scheme) == scheme_length &&
            strncmp(code->scheme, scheme_code, scheme_length) == 0 &&
            strcmp(code->code, colon + 1) == 0) {
            code->is_mode = is_mode;
            code->target = value;
            return MITILOG_OK;
        }
    }
    ext_sr_code *code = grow((void **)&rules->sr_codes, &rules->sr_code_count, sizeof *code);
    if (code == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    code->scheme = strndup(scheme_code, scheme_length);
    code->code = strdup(colon + 1);
    code->is_mode = is_mode;
    code->target = value;
    if (code->scheme == NULL || code->code == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    return MITILOG_OK;
}

mitilog_status ext_site_add_shift(ext_site_rules *rules, const char *name, ext_shift **out,
                                  mitilog_error *error)
{
    for (size_t i = 0; i < rules->shift_count; i++)
        if (strcasecmp(rules->shifts[i].name, name) == 0)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "shift '%s' defined twice",
                                     name);
    ext_shift *shift = grow((void **)&rules->shifts, &rules->shift_count, sizeof *shift);
    if (shift == NULL || (shift->name = strdup(name)) == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    shift->from_minute = -1;
    shift->to_minute = -1;
    *out = shift;
    return MITILOG_OK;
}

int ext_site_parse_clock(const char *text)
{
    if (text == NULL || strlen(text) != 5 || text[2] != ':' || !isdigit((unsigned char)text[0]) ||
        !isdigit((unsigned char)text[1]) || !isdigit((unsigned char)text[3]) ||
        !isdigit((unsigned char)text[4]))
        return -1;
    int hours = (text[0] - '0') * 10 + (text[1] - '0');
    int minutes = (text[3] - '0') * 10 + (text[4] - '0');
    if (minutes > 59 || hours > 24 || (hours == 24 && minutes != 0))
        return -1;
    return hours * 60 + minutes;
}

/* One preset source: a keyword, or "(gggg,eeee) CREATOR". */
static mitilog_status parse_preset(const char *text, ext_preset_source *source,
                                   mitilog_error *error)
{
    memset(source, 0, sizeof *source);
    unsigned group = 0, element = 0;
    int consumed = 0;
    if (sscanf(text, " (%4x,%4x)%n", &group, &element, &consumed) == 2 && consumed > 0) {
        const char *creator = text + consumed;
        while (*creator == ' ')
            creator++;
        if ((group & 1) == 0 || creator[0] == '\0' || strlen(creator) > 64)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "'%.80s': a private tag needs an odd group and "
                                     "its private creator: (0019,1001) CREATOR",
                                     text);
        source->is_private = 1;
        source->group = (uint16_t)group;
        source->element = (uint16_t)element;
        source->private_creator = strdup(creator);
        if (source->private_creator == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
        return MITILOG_OK;
    }
    for (size_t i = 0; i < sizeof preset_keywords / sizeof preset_keywords[0]; i++) {
        if (strcasecmp(text, preset_keywords[i].keyword) == 0) {
            source->field = preset_keywords[i].field;
            return MITILOG_OK;
        }
    }
    return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                             "'%.80s' is not ProtocolName, SeriesDescription, "
                             "StudyDescription, PerformedProcedureStepDescription "
                             "or (gggg,eeee) CREATOR",
                             text);
}

mitilog_status ext_site_set_presets(ext_site_rules *rules, const char *list, mitilog_error *error)
{
    ext_preset_source parsed[EXT_SITE_PRESET_SOURCES_MAX];
    size_t count = 0;
    char *copy = strdup(list);
    if (copy == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    mitilog_status status = MITILOG_OK;
    /* Split at commas outside parentheses: "(0019,1001) X, ProtocolName". */
    int depth = 0;
    for (char *c = copy; *c != '\0'; c++) {
        if (*c == '(')
            depth++;
        else if (*c == ')' && depth > 0)
            depth--;
        else if (*c == ',' && depth == 0)
            *c = '\x1f';
    }
    char *saved = NULL;
    for (char *item = strtok_r(copy, "\x1f", &saved); item != NULL && status == MITILOG_OK;
         item = strtok_r(NULL, "\x1f", &saved)) {
        while (*item == ' ')
            item++;
        size_t length = strlen(item);
        while (length > 0 && item[length - 1] == ' ')
            item[--length] = '\0';
        if (count == EXT_SITE_PRESET_SOURCES_MAX) {
            status = mitilog_error_set(error, MITILOG_ERROR_INVALID, "at most %d preset attributes",
                                       EXT_SITE_PRESET_SOURCES_MAX);
            break;
        }
        status = parse_preset(item, &parsed[count], error);
        if (status == MITILOG_OK)
            count++;
    }
    free(copy);
    if (status == MITILOG_OK && count == 0)
        status = mitilog_error_set(error, MITILOG_ERROR_INVALID, "no preset attribute given");
    if (status != MITILOG_OK) {
        for (size_t i = 0; i < count; i++)
            free(parsed[i].private_creator);
        return status;
    }
    for (size_t i = 0; i < rules->preset_count; i++)
        free(rules->presets[i].private_creator);
    memcpy(rules->presets, parsed, count * sizeof parsed[0]);
    rules->preset_count = count;
    return MITILOG_OK;
}

const ext_exam_type *ext_site_find_exam_type(const ext_site_rules *rules, const char *key)
{
    for (size_t i = 0; rules != NULL && key != NULL && i < rules->exam_type_count; i++)
        if (strcmp(rules->exam_types[i].key, key) == 0)
            return &rules->exam_types[i];
    return NULL;
}
