/* SR content items to quantities through the code table (ext_sr.c).
 * LOINC 18185-9 "Gestational age" with UCUM units wk or d [std: LOINC;
 * UCUM]; 70 d = 10 wk. The 99-prefixed schemes are private by DICOM
 * convention [std: DICOM PS3.16 8.2, from memory]. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "extract/ext_modes.h"
#include "extract/ext_sr.h"

static dcm_sr_item item(unsigned depth, const char *type, const char *scheme, const char *code,
                        const char *value, const char *unit, const char *position)
{
    dcm_sr_item i;
    memset(&i, 0, sizeof i);
    i.depth = depth;
    i.value_type = (char *)type;
    i.concept_scheme = (char *)scheme;
    i.concept_code = (char *)code;
    i.concept_meaning = (char *)"";
    i.numeric_value = (char *)(value ? value : "");
    i.unit_code = (char *)(unit ? unit : "");
    i.position = (char *)position;
    return i;
}

static void rules_for_test(ext_site_rules *rules)
{
    mitilog_error error;
    assert_int_equal(ext_site_rules_init(rules, &error), MITILOG_OK);
    assert_int_equal(ext_site_add_sr_code(rules, "99ACME:MI", "mi", &error), MITILOG_OK);
    assert_int_equal(ext_site_add_sr_code(rules, "99ACME:TIB", "tib", &error), MITILOG_OK);
    assert_int_equal(ext_site_add_sr_code(rules, "99ACME:T", "scan_time", &error), MITILOG_OK);
    assert_int_equal(ext_site_add_sr_code(rules, "99ACME:PW", "mode:pw", &error), MITILOG_OK);
}

static void mapping_units_and_modes(void **state)
{
    (void)state;
    ext_site_rules rules;
    rules_for_test(&rules);
    dcm_sr_item items[] = {
        item(0, "CONTAINER", "99ACME", "ROOT", NULL, NULL, "1"),
        item(1, "NUM", "99ACME", "MI", "1.2", "1", "1.1"),
        item(1, "CONTAINER", "99ACME", "PW", NULL, NULL, "1.2"),
        item(2, "NUM", "99ACME", "TIB", "2.5", NULL, "1.2.1"), /* no unit: tolerated */
        item(2, "TEXT", "99ACME", "MI", NULL, NULL, "1.2.2"),  /* wrong value type */
        item(1, "NUM", "99ACME", "T", "5", "min", "1.3"),
        item(1, "NUM", "LN", "18185-9", "70", "d", "1.4"),
        item(1, "NUM", "LN", "11979-2", "2024", "a", "1.5"), /* known scheme, unmapped code */
        item(1, "NUM", "99OTHER", "X", "9", "1", "1.6"),     /* unknown scheme */
        item(1, "NUM", "99OTHER", "Y", "9", "1", "1.7"),
        item(1, "NUM", "99ACME", "MI", "abc", "1", "1.8"), /* not a DS */
    };
    ext_sr_result result;
    mitilog_error error;
    assert_int_equal(ext_sr_map(&rules, items, sizeof items / sizeof items[0], &result, &error),
                     MITILOG_OK);
    assert_int_equal(result.value_count, 5);
    assert_int_equal(result.values[0].quantity, EXT_QUANTITY_MI);
    assert_string_equal(result.values[0].position, "1.1");
    assert_string_equal(result.values[0].concept, "99ACME:MI");
    assert_int_equal(result.values[0].mode, -1);
    assert_int_equal(result.values[1].quantity, EXT_QUANTITY_TIB);
    assert_int_equal(result.values[1].mode, EXAM_MODE_PW);
    assert_null(result.values[1].unit);
    assert_true(result.values[1].normalised_ok); /* indices are dimensionless */
    assert_true(result.has_scan_time);
    assert_float_equal(result.scan_time_seconds, 300.0, 1e-9); /* 5 min */
    assert_true(result.has_gestational_age);
    assert_float_equal(result.gestational_age_weeks, 10.0, 1e-9); /* 70 d */
    assert_string_equal(result.gestational_age_position, "1.4");
    assert_int_equal(result.values[4].number.status, EXAM_VALUE_INVALID);
    assert_int_equal(result.modes, EXAM_MODE_BIT(EXAM_MODE_PW));
    assert_int_equal(result.unknown_scheme_count, 1); /* once, though two items */
    assert_string_equal(result.unknown_schemes[0], "99OTHER");
    assert_int_equal(result.ignored_count, 1);
    assert_float_equal(result.max_index[EXT_QUANTITY_MI], 1.2, 1e-9);
    ext_sr_result_free(&result);
    ext_site_rules_free(&rules);
}

static void gestational_age_units(void **state)
{
    (void)state;
    ext_site_rules rules;
    rules_for_test(&rules);
    const struct {
        const char *value, *unit;
        int ok;
        double weeks;
    } table[] = {{"20.5", "wk", 1, 20.5},
                 {"63", "d", 1, 9.0},
                 {"5", "mo", 0, 0},
                 {"20", NULL, 0, 0},
                 {"1e1", "wk", 1, 10.0}};
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++) {
        dcm_sr_item items[] = {
            item(0, "CONTAINER", "DCM", "125000", NULL, NULL, "1"),
            item(1, "NUM", "LN", "18185-9", table[i].value, table[i].unit, "1.1")};
        ext_sr_result result;
        mitilog_error error;
        assert_int_equal(ext_sr_map(&rules, items, 2, &result, &error), MITILOG_OK);
        assert_int_equal(result.value_count, 1); /* kept even when not usable */
        assert_int_equal(result.has_gestational_age, table[i].ok);
        if (table[i].ok)
            assert_float_equal(result.gestational_age_weeks, table[i].weeks, 1e-9);
        ext_sr_result_free(&result);
    }
    ext_site_rules_free(&rules);
}

static void nested_fifty_levels(void **state)
{
    (void)state;
    ext_site_rules rules;
    rules_for_test(&rules);
    enum { DEPTH = 50 };
    dcm_sr_item items[DEPTH + 2];
    char positions[DEPTH + 2][160];
    for (unsigned d = 0; d <= DEPTH; d++) {
        snprintf(positions[d], sizeof positions[d], "%s%s1", d ? positions[d - 1] : "",
                 d ? "." : "");
        items[d] = item(d, "CONTAINER", d == 25 ? "99ACME" : "DCM", d == 25 ? "PW" : "C", NULL,
                        NULL, positions[d]);
    }
    memcpy(positions[DEPTH + 1], positions[DEPTH], sizeof positions[DEPTH]);
    strncat(positions[DEPTH + 1], ".1", sizeof positions[DEPTH + 1] - strlen(positions[DEPTH]) - 1);
    items[DEPTH + 1] = item(DEPTH + 1, "NUM", "99ACME", "MI", "0.7", "1", positions[DEPTH + 1]);
    ext_sr_result result;
    mitilog_error error;
    assert_int_equal(ext_sr_map(&rules, items, DEPTH + 2, &result, &error), MITILOG_OK);
    assert_int_equal(result.value_count, 1);
    assert_int_equal(result.values[0].mode, EXAM_MODE_PW); /* inherited over 26 levels */
    assert_string_equal(result.values[0].position, positions[DEPTH + 1]);
    ext_sr_result_free(&result);
    ext_site_rules_free(&rules);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(mapping_units_and_modes),
        cmocka_unit_test(gestational_age_units),
        cmocka_unit_test(nested_fifty_levels),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
