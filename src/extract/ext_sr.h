/*
 * ext_sr.h - acoustic output values from a structured report's content
 * items (the shim's flat, depth-first list of the whole tree), mapped
 * through the site's SR code table (ext_site.h, [sr_codes]): a NUM item
 * whose concept name SCHEME:CODE is listed becomes a quantity (mi, tis,
 * tib, tic, scan_time, gestational_age); a CONTAINER listed as mode:NAME
 * gives its mode to every value beneath it. There is no standard SR
 * template for acoustic output (docs/domain.md section 2), so nothing
 * but LOINC 18185-9 "Gestational age" [std: LOINC] is built in.
 *
 * Tolerated: any depth, missing units (value kept, not normalised),
 * unexpected value types (a listed concept on a TEXT or CODE item is
 * counted as ignored). NUM items of a coding scheme the table does not
 * mention at all are collected in unknown_schemes (the caller logs each
 * once). Provenance of each value: the item's position ("1.2.3") and
 * concept.
 *
 * Ownership: ext_sr_map() fills a caller-supplied result; free with
 * ext_sr_result_free().
 */
#ifndef MITILOG_EXT_SR_H
#define MITILOG_EXT_SR_H

#include "dicom/dcm.h"
#include "extract/ext.h"
#include "extract/ext_site.h"

typedef struct ext_sr_value {
    ext_quantity quantity;
    exam_number number; /* the NUM's DS text classified */
    char *raw;          /* numeric value as sent */
    char *unit;         /* UCUM code, NULL when none was sent */
    int normalised_ok;  /* unit understood */
    double normalised;  /* indices as is; scan time in s; GA in wk */
    char *position;     /* "1.2.3" */
    char *concept;      /* "SCHEME:CODE" */
    char *meaning;
    int mode; /* exam_mode of the enclosing container, -1 */
} ext_sr_value;

typedef struct ext_sr_result {
    ext_sr_value *values;
    size_t value_count;
    unsigned modes; /* from mode containers */
    char **unknown_schemes;
    size_t unknown_scheme_count;
    size_t ignored_count;    /* listed concept, unusable item */
    int has_gestational_age; /* the first usable one */
    double gestational_age_weeks;
    const char *gestational_age_position; /* into values[] */
    int has_scan_time;
    double scan_time_seconds;
    int has_index[4]; /* largest of mi, tis, tib, tic */
    double max_index[4];
} ext_sr_result;

mitilog_status ext_sr_map(const ext_site_rules *rules, const dcm_sr_item *items, size_t count,
                          ext_sr_result *result, mitilog_error *error);
void ext_sr_result_free(ext_sr_result *result);

#endif
