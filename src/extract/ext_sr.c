/* SR content items to acoustic output quantities (ext_sr.h). */
#include "extract/ext_sr.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "extract/ext_modes.h"

static const ext_sr_code *find_code(const ext_site_rules *rules, const char *scheme,
                                    const char *code)
{
    for (size_t i = 0; i < rules->sr_code_count; i++)
        if (strcmp(rules->sr_codes[i].scheme, scheme) == 0 &&
            strcmp(rules->sr_codes[i].code, code) == 0)
            return &rules->sr_codes[i];
    return NULL;
}

static int scheme_known(const ext_site_rules *rules, const char *scheme)
{
    for (size_t i = 0; i < rules->sr_code_count; i++)
        if (strcmp(rules->sr_codes[i].scheme, scheme) == 0)
            return 1;
    return 0;
}

/* Normalises to the quantity's unit: seconds for scan time (UCUM s, min,
 * ms, h), weeks for gestational age (UCUM wk, d); indices are
 * dimensionless (UCUM "1", or no unit). Returns 1 if understood. */
static int normalise(ext_quantity quantity, double value, const char *unit, double *out)
{
    int none = unit == NULL || unit[0] == '\0';
    switch (quantity) {
    case EXT_QUANTITY_SCAN_TIME:
        if (none)
            return 0;
        if (strcmp(unit, "s") == 0) {
            *out = value;
            return 1;
        }
        if (strcmp(unit, "min") == 0) {
            *out = value * 60.0;
            return 1;
        }
        if (strcmp(unit, "ms") == 0) {
            *out = value / 1000.0;
            return 1;
        }
        if (strcmp(unit, "h") == 0) {
            *out = value * 3600.0;
            return 1;
        }
        return 0;
    case EXT_QUANTITY_GESTATIONAL_AGE:
        if (none)
            return 0;
        if (strcmp(unit, "wk") == 0) {
            *out = value;
            return 1;
        }
        if (strcmp(unit, "d") == 0) {
            *out = value / 7.0;
            return 1;
        }
        return 0;
    default:
        if (none || strcmp(unit, "1") == 0 || strcmp(unit, "{ratio}") == 0) {
            *out = value;
            return 1;
        }
        return 0;
    }
}

static char *copy_or_null(const char *text)
{
    return text != NULL && text[0] != '\0' ? strdup(text) : NULL;
}

static mitilog_status remember_scheme(ext_sr_result *result, const char *scheme)
{
    for (size_t i = 0; i < result->unknown_scheme_count; i++)
        if (strcmp(result->unknown_schemes[i], scheme) == 0)
            return MITILOG_OK;
    char **grown =
        realloc(result->unknown_schemes, (result->unknown_scheme_count + 1) * sizeof *grown);
    if (grown == NULL)
        return MITILOG_ERROR_MEMORY;
    result->unknown_schemes = grown;
    if ((grown[result->unknown_scheme_count] = strdup(scheme)) == NULL)
        return MITILOG_ERROR_MEMORY;
    result->unknown_scheme_count++;
    return MITILOG_OK;
}

static mitilog_status add_value(ext_sr_result *result, const dcm_sr_item *item,
                                ext_quantity quantity, int mode)
{
    ext_sr_value *grown = realloc(result->values, (result->value_count + 1) * sizeof *grown);
    if (grown == NULL)
        return MITILOG_ERROR_MEMORY;
    result->values = grown;
    ext_sr_value *value = &grown[result->value_count++];
    memset(value, 0, sizeof *value);
    value->quantity = quantity;
    value->mode = mode;
    value->number = ext_parse_decimal_string(item->numeric_value);
    value->raw = copy_or_null(item->numeric_value);
    value->unit = copy_or_null(item->unit_code);
    value->position = strdup(item->position != NULL ? item->position : "");
    size_t length = strlen(item->concept_scheme) + strlen(item->concept_code) + 2;
    value->concept = malloc(length);
    value->meaning = copy_or_null(item->concept_meaning);
    if (value->position == NULL || value->concept == NULL)
        return MITILOG_ERROR_MEMORY;
    snprintf(value->concept, length, "%s:%s", item->concept_scheme, item->concept_code);
    if (value->number.status == EXAM_VALUE_OK)
        value->normalised_ok =
            normalise(quantity, value->number.value, value->unit, &value->normalised);
    if (!value->normalised_ok)
        return MITILOG_OK;
    if (quantity == EXT_QUANTITY_GESTATIONAL_AGE && !result->has_gestational_age) {
        result->has_gestational_age = 1;
        result->gestational_age_weeks = value->normalised;
        result->gestational_age_position = value->position;
    } else if (quantity == EXT_QUANTITY_SCAN_TIME && !result->has_scan_time) {
        result->has_scan_time = 1;
        result->scan_time_seconds = value->normalised;
    } else if (quantity <= EXT_QUANTITY_TIC) {
        if (!result->has_index[quantity] || value->normalised > result->max_index[quantity])
            result->max_index[quantity] = value->normalised;
        result->has_index[quantity] = 1;
    }
    return MITILOG_OK;
}

mitilog_status ext_sr_map(const ext_site_rules *rules, const dcm_sr_item *items, size_t count,
                          ext_sr_result *result, mitilog_error *error)
{
    memset(result, 0, sizeof *result);
    unsigned max_depth = 0;
    for (size_t i = 0; i < count; i++)
        max_depth = items[i].depth > max_depth ? items[i].depth : max_depth;
    /* mode_at[d]: the mode in force for children of the item at depth d. */
    int *mode_at = malloc((max_depth + 2) * sizeof *mode_at);
    if (mode_at == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    mitilog_status status = MITILOG_OK;
    for (size_t i = 0; i < count && status == MITILOG_OK; i++) {
        const dcm_sr_item *item = &items[i];
        int inherited = item->depth == 0 ? -1 : mode_at[item->depth - 1];
        mode_at[item->depth] = inherited;
        const char *scheme = item->concept_scheme != NULL ? item->concept_scheme : "";
        const char *code_value = item->concept_code != NULL ? item->concept_code : "";
        const char *type = item->value_type != NULL ? item->value_type : "";
        const ext_sr_code *code = find_code(rules, scheme, code_value);
        if (code != NULL && code->is_mode) {
            if (strcmp(type, "CONTAINER") == 0) {
                mode_at[item->depth] = code->target;
                result->modes |= EXAM_MODE_BIT(code->target);
            } else {
                result->ignored_count++;
            }
        } else if (code != NULL) {
            if (strcmp(type, "NUM") == 0)
                status = add_value(result, item, (ext_quantity)code->target, inherited);
            else
                result->ignored_count++;
        } else if (strcmp(type, "NUM") == 0 && scheme[0] != '\0' && !scheme_known(rules, scheme)) {
            status = remember_scheme(result, scheme);
        }
    }
    free(mode_at);
    if (status != MITILOG_OK) {
        ext_sr_result_free(result);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory mapping SR items");
    }
    return MITILOG_OK;
}

void ext_sr_result_free(ext_sr_result *result)
{
    if (result == NULL)
        return;
    for (size_t i = 0; i < result->value_count; i++) {
        ext_sr_value *value = &result->values[i];
        free(value->raw);
        free(value->unit);
        free(value->position);
        free(value->concept);
        free(value->meaning);
    }
    free(result->values);
    for (size_t i = 0; i < result->unknown_scheme_count; i++)
        free(result->unknown_schemes[i]);
    free(result->unknown_schemes);
    memset(result, 0, sizeof *result);
}
