/* The exam record (ext_exam.c): governing index by exam type and
 * gestational age [docs/domain.md section 3: TIS below 10 weeks, TIB
 * from 10 weeks or unknown, TIC transcranial, TIS otherwise], exam type
 * by majority, GA from SR before the nominal one, maxima per index and
 * mode, and the timeline (docs/domain.md section 5: interval since the
 * previous capture attributed to the next, capped at 300 s, plus cine). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "extract/ext_exam.h"

static void governing(void **state)
{
    (void)state;
    ext_exam_type type;
    memset(&type, 0, sizeof type);
    const char *source = NULL;
    type.governing = EXAM_GOVERNING_BY_GESTATION;
    assert_int_equal(ext_governing_index(&type, 1, 9.9, &source), EXAM_INDEX_TIS);
    assert_string_equal(source, "gestational_age");
    assert_int_equal(ext_governing_index(&type, 1, 10.0, &source), EXAM_INDEX_TIB);
    assert_int_equal(ext_governing_index(&type, 0, 0, &source), EXAM_INDEX_TIB);
    assert_string_equal(source, "gestational_age_unknown");
    type.governing = EXAM_GOVERNING_TIC;
    assert_int_equal(ext_governing_index(&type, 0, 0, &source), EXAM_INDEX_TIC);
    type.governing = EXAM_GOVERNING_TIS;
    assert_int_equal(ext_governing_index(&type, 1, 30, &source), EXAM_INDEX_TIS);
    assert_int_equal(ext_governing_index(NULL, 0, 0, &source), EXAM_INDEX_TIS);
    assert_string_equal(source, "default");
}

static ext_exam_instance capture(const char *uid, const char *at, const char *type, double mi,
                                 double tib, unsigned modes, double cine)
{
    ext_exam_instance i;
    memset(&i, 0, sizeof i);
    i.sop_instance_uid = (char *)uid;
    i.kind = (char *)(cine > 0 ? "multiframe" : "image");
    i.acquired_at = (char *)at;
    i.exam_type = (char *)type;
    i.exam_type_source = (char *)"study_description";
    i.is_capture = 1;
    i.indices[EXAM_INDEX_MI] = (exam_number){EXAM_VALUE_OK, mi};
    i.indices[EXAM_INDEX_TIB] =
        tib >= 0 ? (exam_number){EXAM_VALUE_OK, tib} : (exam_number){EXAM_VALUE_MISSING, 0};
    i.modes = modes;
    i.cine_seconds = cine;
    return i;
}

static void exam_record(void **state)
{
    (void)state;
    ext_site_rules rules;
    mitilog_error error;
    assert_int_equal(ext_site_rules_init(&rules, &error), MITILOG_OK);
    ext_exam_type *ob = NULL, *abdomen = NULL;
    assert_int_equal(ext_site_add_exam_type(&rules, "ob", &ob, &error), MITILOG_OK);
    ob->governing = EXAM_GOVERNING_BY_GESTATION;
    ob->nominal_gestational_age_weeks = 20;
    assert_int_equal(ext_site_add_exam_type(&rules, "abdomen", &abdomen, &error), MITILOG_OK);
    unsigned b = EXAM_MODE_BIT(EXAM_MODE_2D), pw = b | EXAM_MODE_BIT(EXAM_MODE_PW);
    ext_exam_instance instances[5];
    instances[0] = capture("1", "2024-05-01T10:00:00", "ob", 0.9, 0.3, b, 0);
    instances[1] = capture("2", "2024-05-01T10:01:00", "ob", 1.1, 1.4, pw, 0);
    instances[2] = capture("3", "2024-05-01T10:20:00", "abdomen", 1.0, 0.5, b, 3.0);
    instances[3] = capture("4", NULL, "ob", 1.5, -1, b, 0);
    memset(&instances[4], 0, sizeof instances[4]);
    instances[4].sop_instance_uid = (char *)"5";
    instances[4].kind = (char *)"sr";
    instances[4].acquired_at = (char *)"2024-05-01T10:21:00";
    instances[4].has_sr_gestational_age = 1;
    instances[4].sr_gestational_age_weeks = 9.0;
    instances[4].sr_gestational_age_position = (char *)"1.4";
    ext_exam exam;
    assert_int_equal(ext_exam_build(&rules, instances, 5, &exam, &error), MITILOG_OK);
    assert_string_equal(exam.exam_type->key, "ob"); /* 3 of 5 */
    assert_true(exam.has_gestational_age);
    assert_float_equal(exam.gestational_age_weeks, 9.0, 1e-9); /* SR beats nominal */
    assert_int_equal(exam.governing_index, EXAM_INDEX_TIS);    /* < 10 weeks */
    assert_int_equal(exam.capture_count, 4);
    assert_int_equal(exam.sr_count, 1);
    assert_int_equal(exam.cine_count, 1);
    assert_string_equal(exam.first_acquired_at, "2024-05-01T10:00:00");
    assert_string_equal(exam.last_acquired_at, "2024-05-01T10:21:00");
    assert_float_equal(exam.maxima[EXAM_INDEX_MI].value, 1.5, 1e-9);
    assert_float_equal(exam.mode_maxima[EXAM_MODE_PW][EXAM_INDEX_TIB].value, 1.4, 1e-9);
    assert_int_equal(exam.mode_maxima[EXAM_MODE_PW][EXAM_INDEX_TIS].status, EXAM_VALUE_MISSING);
    /* timeline: 0, 60, capped 300 + 3 s cine; capture 4 untimed */
    assert_int_equal(exam.summary.entry_count, 3);
    assert_int_equal(exam.summary.untimed_count, 1);
    assert_int_equal(exam.summary.capped_count, 1);
    assert_float_equal(exam.summary.estimated_seconds, 363.0, 1e-9);
    assert_float_equal(exam.entries[2].attributed_seconds, 303.0, 1e-9);
    ext_exam_free(&exam);

    /* No SR: the nominal age of the exam type decides (20 weeks: TIB). */
    assert_int_equal(ext_exam_build(&rules, instances, 4, &exam, &error), MITILOG_OK);
    assert_float_equal(exam.gestational_age_weeks, 20.0, 1e-9);
    assert_string_equal(exam.gestational_age_source, "exam_type_trimester");
    assert_int_equal(exam.governing_index, EXAM_INDEX_TIB);
    ext_exam_free(&exam);
    ext_site_rules_free(&rules);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(governing),
        cmocka_unit_test(exam_record),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
