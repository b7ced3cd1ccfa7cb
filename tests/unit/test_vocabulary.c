/* The exam vocabulary (src/exam): names, the TI ladder, the governing
 * index, groups and severities, each defined once and read by every
 * stage. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "exam/exam.h"
#include "extract/ext_modes.h"

/* The ladder is ascending and begins with the thresholds the period
 * statistics report (docs/api.md, GET /api/v1/stats: "per governing TI
 * threshold 0.7, 1.0, 1.5, 2.0"); the measurements' keys go on to 3.0
 * (docs/api.md, "Findings in a study"). */
static void ladder(void **state)
{
    (void)state;
    static const char *const documented[] = {"0.7", "1.0", "1.5", "2.0", "2.5", "3.0"};
    assert_int_equal(EXAM_TI_STEP_COUNT, 6);
    assert_int_equal(EXAM_TI_STATISTICS_STEPS, 4);
    for (int k = 0; k < EXAM_TI_STEP_COUNT; k++) {
        char label[EXAM_TI_LABEL_SIZE];
        exam_ti_threshold_label(exam_ti_ladder[k], label);
        assert_string_equal(label, documented[k]);
        if (k > 0)
            assert_true(exam_ti_ladder[k] > exam_ti_ladder[k - 1]);
    }
}

/* Keys as the API writes them: at least one decimal, never rounded
 * (common practice, no source). */
static void threshold_labels(void **state)
{
    (void)state;
    char label[EXAM_TI_LABEL_SIZE];
    exam_ti_threshold_label(1.0, label);
    assert_string_equal(label, "1.0");
    exam_ti_threshold_label(0.75, label);
    assert_string_equal(label, "0.75");
    exam_ti_threshold_label(4, label);
    assert_string_equal(label, "4.0");
}

/* Governing index by rule and gestational age: TIS below 10 weeks, TIB
 * from 10 weeks or when the age is unknown, TIC for transcranial rules
 * (docs/domain.md section 3; the trade's rule of bone ossification from
 * about 10 weeks). */
static void governing_index(void **state)
{
    (void)state;
    const char *source = NULL;
    assert_int_equal(exam_governing_index(EXAM_GOVERNING_BY_GESTATION, 1, 9.99, &source),
                     EXAM_INDEX_TIS);
    assert_string_equal(source, "gestational_age");
    assert_int_equal(exam_governing_index(EXAM_GOVERNING_BY_GESTATION, 1, 10.0, &source),
                     EXAM_INDEX_TIB);
    assert_int_equal(exam_governing_index(EXAM_GOVERNING_BY_GESTATION, 0, 0, &source),
                     EXAM_INDEX_TIB);
    assert_string_equal(source, "gestational_age_unknown");
    assert_int_equal(exam_governing_index(EXAM_GOVERNING_TIC, 1, 30, NULL), EXAM_INDEX_TIC);
    assert_int_equal(exam_governing_index(EXAM_GOVERNING_TIB, 0, 0, &source), EXAM_INDEX_TIB);
    assert_string_equal(source, "exam_type");
    assert_int_equal(exam_governing_index(EXAM_GOVERNING_TIS, 1, 5, NULL), EXAM_INDEX_TIS);
}

/* Index and mode names of the API (docs/api.md, instance object). */
static void names(void **state)
{
    (void)state;
    static const char *const indices[] = {"mi", "tis", "tib", "tic", "tis_focus", "tis_surface"};
    for (int x = 0; x < EXAM_INDEX_COUNT; x++)
        assert_string_equal(exam_index_name((exam_index)x), indices[x]);
    assert_string_equal(exam_index_name(EXAM_INDEX_COUNT), "unknown");
    for (int m = 0; m < EXAM_MODE_COUNT; m++)
        assert_int_equal(exam_mode_from_name(exam_mode_name((exam_mode)m)), m);
    assert_null(exam_mode_name(EXAM_MODE_COUNT));
    assert_int_equal(exam_mode_from_name("color"), EXAM_MODE_COLOUR);
    assert_int_equal(exam_mode_from_name("sideways"), -1);
    for (int g = 0; g < EXAM_GROUP_COUNT; g++) {
        exam_group group = EXAM_GROUP_COUNT;
        assert_int_equal(exam_group_parse(exam_group_name((exam_group)g), &group), 0);
        assert_int_equal(group, g);
    }
    exam_group group;
    assert_int_equal(exam_group_parse("obstetrics", &group), -1);
    exam_severity severity;
    assert_int_equal(exam_severity_parse("violation", &severity), 0);
    assert_int_equal(severity, EXAM_SEVERITY_VIOLATION);
    assert_string_equal(exam_severity_name(EXAM_SEVERITY_ADVISORY), "advisory");
    assert_int_equal(exam_severity_parse("Warning", &severity), -1);
}

/* One bit set from Image Type value 4 to the rules: PS3.3 C.8.5.6.1.1
 * bits 0004 CW, 0008 PW, 0010 colour, 0020 colour M and 0100 colour power
 * are Doppler; 0001 2D, 0002 M and 0040 3D are not. */
static void doppler_modes(void **state)
{
    (void)state;
    static const struct {
        const char *bitmap;
        int doppler;
    } cases[] = {{"0001", 0}, {"0002", 0}, {"0004", 1}, {"0008", 1}, {"0010", 1},
                 {"0020", 1}, {"0040", 0}, {"0100", 1}, {"0200", 0}, {"0400", 0}};
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char image_type[64];
        strcpy(image_type, "ORIGINAL\\PRIMARY\\ABDOMINAL\\");
        strcat(image_type, cases[i].bitmap);
        ext_bitmap bitmap = ext_modes_from_image_type(image_type);
        assert_int_equal(bitmap.status, EXT_BITMAP_OK);
        assert_int_equal((bitmap.modes & EXAM_MODES_DOPPLER) != 0, cases[i].doppler);
    }
}

/* A site name ([receiver] site, exam.h): plain words of 1 to 64 bytes, no
 * control character, no comma (filters list sites with commas), no space
 * at either end. Common practice, no source. */
static void site_names(void **state)
{
    (void)state;
    char reason[160];
    assert_true(exam_site_name_check("main", reason, sizeof reason));
    assert_true(exam_site_name_check("North Wing 2", reason, sizeof reason));
    assert_true(exam_site_name_check("H\xc3\xb4pital-Sud_3.b", reason, sizeof reason));
    char longest[66];
    memset(longest, 'x', 64);
    longest[64] = '\0';
    assert_true(exam_site_name_check(longest, reason, sizeof reason));
    longest[64] = 'x';
    longest[65] = '\0';
    assert_false(exam_site_name_check(longest, reason, sizeof reason));
    assert_non_null(strstr(reason, "1 to 64"));
    assert_false(exam_site_name_check("", reason, sizeof reason));
    assert_false(exam_site_name_check(NULL, NULL, 0));
    assert_false(exam_site_name_check("north,south", reason, sizeof reason));
    assert_non_null(strstr(reason, "comma"));
    assert_false(exam_site_name_check("north\tside", reason, sizeof reason));
    assert_non_null(strstr(reason, "control"));
    assert_false(exam_site_name_check("del\x7f", reason, sizeof reason));
    assert_false(exam_site_name_check(" north", reason, sizeof reason));
    assert_false(exam_site_name_check("north ", reason, sizeof reason));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(ladder),          cmocka_unit_test(threshold_labels),
        cmocka_unit_test(governing_index), cmocka_unit_test(names),
        cmocka_unit_test(doppler_modes),   cmocka_unit_test(site_names),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
