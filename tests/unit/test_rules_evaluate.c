/* The rules on hand-built exams, at and around every limit of the shipped
 * policy (values of docs/domain.md section 4, marked there "from
 * memory": BMUS tables, FDA maxima, ISUOG). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "rules_test_support.h"

static rules_policy *policy;

static int setup(void **state)
{
    (void)state;
    policy = support_shipped_policy();
    return policy ? 0 : -1;
}

static int teardown(void **state)
{
    (void)state;
    rules_policy_free(policy);
    return 0;
}

/* One capture whose cine lasts seconds, with the given index at value:
 * the timeline attributes exactly those seconds to it. */
static void evaluate_one(exam_group group, double weeks, exam_index index, double value,
                         double seconds, rules_result *result)
{
    exam_capture capture = support_capture("1.2.3.4.1", 0, seconds);
    capture.indices[index] = support_number(value);
    rules_exam exam = support_exam(group, &capture, 1);
    exam.gestational_age_weeks = weeks;
    exam.gestational_age_known = weeks > 0;
    mitilog_error error;
    assert_int_equal(rules_evaluate(policy, &exam, result, &error), MITILOG_OK);
}

typedef struct step {
    double threshold;
    double minutes; /* < 0: not recommended */
} step;

/* At each threshold: TI exactly at it for exactly the limit is allowed; one
 * second longer is one finding at that threshold; a TI just below it for
 * the same time is none (the lower steps allow longer). */
static void check_table(const char *rule_id, exam_group group, double weeks, exam_index index,
                        const step *steps, size_t count)
{
    for (size_t s = 0; s < count; s++) {
        rules_result result;
        double limit_seconds = steps[s].minutes < 0 ? 0 : steps[s].minutes * 60;
        if (steps[s].minutes >= 0) {
            evaluate_one(group, weeks, index, steps[s].threshold, limit_seconds, &result);
            assert_int_equal(support_count(&result, rule_id, -1), 0);
            rules_result_free(&result);
        }
        evaluate_one(group, weeks, index, steps[s].threshold, limit_seconds + 1, &result);
        assert_int_equal(support_count(&result, rule_id, -1), 1);
        const exam_finding *finding = support_find(&result, rule_id, steps[s].threshold);
        assert_non_null(finding);
        assert_close(finding->measured, (limit_seconds + 1) / 60.0, 1e-9);
        assert_close(finding->limit, limit_seconds / 60.0, 1e-9);
        assert_int_equal(finding->index, index);
        assert_int_equal(finding->instance_count, 1);
        assert_non_null(strstr(finding->assumptions, "estimate"));
        assert_non_null(strstr(finding->source, "from memory"));
        assert_string_equal(finding->policy_version, rules_policy_version(policy));
        rules_result_free(&result);
        evaluate_one(group, weeks, index, steps[s].threshold - 0.01, limit_seconds + 1, &result);
        assert_int_equal(support_count(&result, rule_id, -1), 0);
        rules_result_free(&result);
    }
}

/* BMUS obstetric/neonatal table as in docs/domain.md (from memory). */
static void obstetric_table_at_and_around_each_threshold(void **state)
{
    (void)state;
    const step table[] = {{0.7, 60}, {1.0, 30}, {1.5, 15}, {2.0, 4}, {2.5, 1}, {3.0, -1}};
    check_table("dwell_obstetric_neonatal", EXAM_GROUP_OBSTETRIC, 20, EXAM_INDEX_TIB, table, 6);
    check_table("dwell_obstetric_neonatal", EXAM_GROUP_NEONATAL, 0, EXAM_INDEX_TIS, table, 6);
    /* Not recommended: a still image at 3.0 with no attributed time. */
    rules_result result;
    evaluate_one(EXAM_GROUP_OBSTETRIC, 20, EXAM_INDEX_TIB, 3.0, 0, &result);
    assert_int_equal(support_count(&result, "dwell_obstetric_neonatal", 3.0), 1);
    rules_result_free(&result);
}

/* BMUS general table as in docs/domain.md (from memory; verify). */
static void general_table_at_and_around_each_threshold(void **state)
{
    (void)state;
    const step table[] = {{1.0, 120}, {1.5, 60}, {2.0, 15}, {2.5, 4}, {3.0, 1}};
    check_table("dwell_general", EXAM_GROUP_GENERAL, 0, EXAM_INDEX_TIS, table, 5);
    check_table("dwell_general", EXAM_GROUP_TRANSCRANIAL, 0, EXAM_INDEX_TIC, table, 5);
    rules_result result;
    /* TI up to 1.0 unrestricted: 0.99 for five hours is no finding. */
    evaluate_one(EXAM_GROUP_GENERAL, 0, EXAM_INDEX_TIS, 0.99, 5 * 3600, &result);
    assert_int_equal(result.finding_count, 0);
    rules_result_free(&result);
    /* The OB table does not apply to a general exam. */
    evaluate_one(EXAM_GROUP_GENERAL, 0, EXAM_INDEX_TIS, 0.8, 61 * 60, &result);
    assert_int_equal(support_count(&result, "dwell_obstetric_neonatal", -1), 0);
    rules_result_free(&result);
}

/* docs/domain.md section 3: obstetric < 10 weeks TIS, >= 10 weeks or
 * unknown TIB; transcranial TIC; neonatal head TIS. */
static void governing_index_switches_at_ten_weeks(void **state)
{
    (void)state;
    rules_exam exam = support_exam(EXAM_GROUP_OBSTETRIC, NULL, 0);
    exam.gestational_age_known = 1;
    exam.gestational_age_weeks = 9 + 6 / 7.0;
    assert_int_equal(rules_governing_index(&exam), EXAM_INDEX_TIS);
    exam.gestational_age_weeks = 10;
    assert_int_equal(rules_governing_index(&exam), EXAM_INDEX_TIB);
    exam.gestational_age_known = 0;
    assert_int_equal(rules_governing_index(&exam), EXAM_INDEX_TIB);
    exam.group = EXAM_GROUP_TRANSCRANIAL;
    assert_int_equal(rules_governing_index(&exam), EXAM_INDEX_TIC);
    exam.group = EXAM_GROUP_NEONATAL;
    assert_int_equal(rules_governing_index(&exam), EXAM_INDEX_TIS);
    exam.group = EXAM_GROUP_GENERAL;
    assert_int_equal(rules_governing_index(&exam), EXAM_INDEX_TIS);
    /* In evaluation: TIS 1.2 and TIB 0.5 for 31 min; 9+6 judges TIS. */
    exam_capture capture = support_capture("1", 0, 31 * 60);
    capture.indices[EXAM_INDEX_TIS] = support_number(1.2);
    capture.indices[EXAM_INDEX_TIB] = support_number(0.5);
    rules_exam ob = support_exam(EXAM_GROUP_OBSTETRIC, &capture, 1);
    ob.gestational_age_known = 1;
    ob.gestational_age_weeks = 9 + 6 / 7.0;
    rules_result result;
    mitilog_error error;
    assert_int_equal(rules_evaluate(policy, &ob, &result, &error), MITILOG_OK);
    assert_int_equal(result.measurements.governing_index, EXAM_INDEX_TIS);
    assert_int_equal(support_count(&result, "dwell_obstetric_neonatal", 1.0), 1);
    rules_result_free(&result);
    ob.gestational_age_weeks = 10;
    assert_int_equal(rules_evaluate(policy, &ob, &result, &error), MITILOG_OK);
    assert_int_equal(result.measurements.governing_index, EXAM_INDEX_TIB);
    assert_int_equal(support_count(&result, "dwell_obstetric_neonatal", -1), 0);
    rules_result_free(&result);
    /* A governing index named by the exam record wins. */
    ob.has_governing_index = 1;
    ob.governing_index = EXAM_INDEX_TIS;
    assert_int_equal(rules_evaluate(policy, &ob, &result, &error), MITILOG_OK);
    assert_int_equal(support_count(&result, "dwell_obstetric_neonatal", 1.0), 1);
    rules_result_free(&result);
}

static size_t doppler_findings(double weeks, unsigned modes, double tib, exam_severity *severity)
{
    exam_capture captures[2] = {support_capture("1", 0, 0), support_capture("2", 120, 0)};
    captures[1].modes = modes;
    captures[1].indices[EXAM_INDEX_TIB] = support_number(tib);
    rules_exam exam = support_exam(EXAM_GROUP_OBSTETRIC, captures, 2);
    exam.gestational_age_known = 1;
    exam.gestational_age_weeks = weeks;
    rules_result result;
    mitilog_error error;
    assert_int_equal(rules_evaluate(policy, &exam, &result, &error), MITILOG_OK);
    size_t count = support_count(&result, "first_trimester_doppler", -1);
    const exam_finding *finding = support_find(&result, "first_trimester_doppler", -1);
    if (finding) {
        *severity = finding->severity;
        assert_close(finding->estimated_seconds, 120, 1e-9);
        assert_close(result.measurements.doppler_seconds, 120, 1e-9);
    }
    rules_result_free(&result);
    return count;
}

/* ISUOG 2011 (from memory): 13+6 is first trimester, 14+0 is not; PW,
 * CW and colour count, plain 2D does not; TI above 1.0 raises severity. */
static void first_trimester_doppler_boundary(void **state)
{
    (void)state;
    exam_severity severity = EXAM_SEVERITY_VIOLATION;
    assert_int_equal(doppler_findings(13 + 6 / 7.0,
                                      EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_PW),
                                      0.8, &severity),
                     1);
    assert_int_equal(severity, EXAM_SEVERITY_ADVISORY);
    assert_int_equal(doppler_findings(14.0,
                                      EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_PW),
                                      0.8, &severity),
                     0);
    assert_int_equal(doppler_findings(12, EXAM_MODE_BIT(EXAM_MODE_CW), 1.0, &severity), 1);
    assert_int_equal(severity, EXAM_SEVERITY_ADVISORY);
    assert_int_equal(doppler_findings(12, EXAM_MODE_BIT(EXAM_MODE_COLOUR), 1.01, &severity), 1);
    assert_int_equal(severity, EXAM_SEVERITY_WARNING);
    assert_int_equal(doppler_findings(12, EXAM_MODE_BIT(EXAM_MODE_POWER), 0.5, &severity), 1);
    assert_int_equal(doppler_findings(12, EXAM_MODE_BIT(EXAM_MODE_2D) | EXAM_MODE_BIT(EXAM_MODE_M),
                                      0.5, &severity),
                     0);
}

static rules_result evaluate_mi(exam_group group, const char *category, double mi, double tis)
{
    exam_capture capture = support_capture("1", 0, 10);
    capture.indices[EXAM_INDEX_MI] = support_number(mi);
    capture.indices[EXAM_INDEX_TIS] = support_number(tis);
    rules_exam exam = support_exam(group, &capture, 1);
    exam.category = category;
    rules_result result;
    mitilog_error error;
    assert_int_equal(rules_evaluate(policy, &exam, &result, &error), MITILOG_OK);
    return result;
}

/* FDA track 3 (from memory): MI 1.9; ophthalmic MI 0.23 and TI 1.0. */
static void equipment_maxima(void **state)
{
    (void)state;
    rules_result result = evaluate_mi(EXAM_GROUP_GENERAL, NULL, 1.9, 0.5);
    assert_int_equal(result.finding_count, 0);
    rules_result_free(&result);
    result = evaluate_mi(EXAM_GROUP_GENERAL, NULL, 1.91, 0.5);
    assert_int_equal(result.finding_count, 1);
    assert_string_equal(result.findings[0].rule_id, "equipment_maxima");
    assert_int_equal(result.findings[0].severity, EXAM_SEVERITY_VIOLATION);
    assert_string_equal(result.findings[0].quantity, "mi");
    assert_non_null(strstr(result.findings[0].assumptions, "equipment"));
    rules_result_free(&result);
    result = evaluate_mi(EXAM_GROUP_OPHTHALMIC, NULL, 0.23, 1.0);
    assert_int_equal(result.finding_count, 0);
    rules_result_free(&result);
    result = evaluate_mi(EXAM_GROUP_OPHTHALMIC, NULL, 0.24, 1.01);
    assert_int_equal(support_count(&result, "equipment_maxima", -1), 2);
    assert_int_equal(support_count(&result, "mi_ceiling", -1), 1);
    assert_int_equal(support_count(&result, "ti_ceiling", -1), 1);
    rules_result_free(&result);
}

/* BMUS 2009/2010 (from memory): neonatal lung/bowel MI 0.3; contrast 0.7. */
static void mi_ceiling_per_category(void **state)
{
    (void)state;
    rules_result result = evaluate_mi(EXAM_GROUP_NEONATAL, "neonatal_lung", 0.3, 0.2);
    assert_int_equal(result.finding_count, 0);
    rules_result_free(&result);
    result = evaluate_mi(EXAM_GROUP_NEONATAL, "neonatal_lung", 0.31, 0.2);
    assert_int_equal(support_count(&result, "mi_ceiling", -1), 1);
    assert_close(result.findings[0].limit, 0.3, 1e-12);
    rules_result_free(&result);
    result = evaluate_mi(EXAM_GROUP_NEONATAL, "neonatal_head", 0.8, 0.2);
    assert_int_equal(support_count(&result, "mi_ceiling", -1), 0);
    rules_result_free(&result);
    result = evaluate_mi(EXAM_GROUP_CONTRAST, NULL, 0.7, 0.2);
    assert_int_equal(result.finding_count, 0);
    rules_result_free(&result);
    result = evaluate_mi(EXAM_GROUP_CONTRAST, NULL, 0.71, 0.2);
    assert_int_equal(support_count(&result, "mi_ceiling", -1), 1);
    rules_result_free(&result);
    result = evaluate_mi(EXAM_GROUP_GENERAL, NULL, 1.5, 0.2);
    assert_int_equal(result.finding_count, 0);
    rules_result_free(&result);
}

/* One silent device is one finding, with its count and first/last time. */
static void output_not_reported_aggregates_per_device(void **state)
{
    (void)state;
    exam_device_instance instances[11];
    const char *uids[11] = {"a1", "a2", "a3", "a4", "a5", "y1", "y2", "y3", "b1", "b2", "b3"};
    for (size_t i = 0; i < 11; i++) {
        instances[i] = (exam_device_instance){
            uids[i],   "1.2", i < 8 ? "ROOM A" : "ROOM B", i < 5 || i >= 8 ? "C5-1" : "L12-5", 0,
            100.0 * i, 1};
    }
    for (size_t i = 5; i < 8; i++)
        instances[i].has_any_index = 1; /* the L12-5 reports its indices */
    instances[10].has_any_index = 1;
    rules_result result;
    mitilog_error error;
    assert_int_equal(rules_output_not_reported(policy, instances, 11, &result, &error), MITILOG_OK);
    assert_int_equal(result.finding_count, 2);
    assert_string_equal(result.findings[0].room, "ROOM A");
    assert_string_equal(result.findings[0].transducer, "C5-1");
    assert_close(result.findings[0].measured, 5, 0);
    assert_int_equal(result.findings[0].instance_count, 5);
    assert_string_equal(result.findings[0].instance_uids[4], "a5");
    assert_close(result.findings[0].first_seconds, 0, 0);
    assert_close(result.findings[0].last_seconds, 400, 0);
    assert_string_equal(result.findings[1].room, "ROOM B");
    assert_close(result.findings[1].measured, 2, 0);
    assert_close(result.findings[1].last_seconds, 900, 0);
    assert_int_equal(result.findings[1].severity, EXAM_SEVERITY_ADVISORY);
    rules_result_free(&result);
}

/* Exam duration and the CEM43 threshold are off by default. */
static void optional_rules_off_by_default(void **state)
{
    (void)state;
    /* TIS 6.0 (43 C worst case) for 10 min: CEM43 = 10 (Sapareto & Dewey). */
    exam_capture captures[3] = {support_capture("1", 0, 0), support_capture("2", 3 * 3600, 0),
                                support_capture("3", 3 * 3600 + 1, 600)};
    captures[2].indices[EXAM_INDEX_TIS] = support_number(6.0);
    rules_exam exam = support_exam(EXAM_GROUP_GENERAL, captures, 3);
    rules_result result;
    mitilog_error error;
    assert_int_equal(rules_evaluate(policy, &exam, &result, &error), MITILOG_OK);
    assert_close(result.measurements.cem43_minutes, 10 + 1 / 60.0, 1e-9);
    assert_int_equal(support_count(&result, "thermal_dose", -1), 0);
    assert_int_equal(support_count(&result, "exam_duration", -1), 0);
    rules_result_free(&result);
    rules_policy *site = support_policy_with("limit = off\n\n[rule exam_duration]",
                                             "limit = 5\n\n[rule exam_duration]");
    assert_non_null(site);
    assert_int_equal(rules_evaluate(site, &exam, &result, &error), MITILOG_OK);
    const exam_finding *dose = support_find(&result, "thermal_dose", -1);
    assert_non_null(dose);
    assert_close(dose->measured, 10 + 1 / 60.0, 1e-9);
    assert_string_equal(dose->unit, "CEM43 min");
    rules_result_free(&result);
    rules_policy_free(site);
    site = support_policy_with("limit = off\n", "limit = 120\n"); /* mi_ceiling: first */
    rules_policy_free(site);
    char *text = support_shipped_text();
    char *at = strstr(text, "[rule exam_duration]");
    at = strstr(at, "\nlimit = off");
    memcpy(at, "\nlimit = 179", 12);
    assert_int_equal(rules_policy_load_text(text, "p.ini", &site, &error), MITILOG_OK);
    free(text);
    assert_int_equal(rules_evaluate(site, &exam, &result, &error), MITILOG_OK);
    const exam_finding *duration = support_find(&result, "exam_duration", -1);
    assert_non_null(duration);
    assert_close(duration->measured, 180 + 1 / 60.0, 1e-9); /* 0 s to 10801 s */
    rules_result_free(&result);
    rules_policy_free(site);
}

/* An open exam's findings are provisional. */
static void open_exam_is_provisional(void **state)
{
    (void)state;
    exam_capture capture = support_capture("1", 0, 10);
    capture.indices[EXAM_INDEX_MI] = support_number(2.0);
    rules_exam exam = support_exam(EXAM_GROUP_GENERAL, &capture, 1);
    exam.closed = 0;
    rules_result result;
    mitilog_error error;
    assert_int_equal(rules_evaluate(policy, &exam, &result, &error), MITILOG_OK);
    assert_int_equal(result.finding_count, 1);
    assert_true(result.findings[0].provisional);
    rules_result_free(&result);
    exam.closed = 1;
    assert_int_equal(rules_evaluate(policy, &exam, &result, &error), MITILOG_OK);
    assert_false(result.findings[0].provisional);
    rules_result_free(&result);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(obstetric_table_at_and_around_each_threshold),
        cmocka_unit_test(general_table_at_and_around_each_threshold),
        cmocka_unit_test(governing_index_switches_at_ten_weeks),
        cmocka_unit_test(first_trimester_doppler_boundary),
        cmocka_unit_test(equipment_maxima),
        cmocka_unit_test(mi_ceiling_per_category),
        cmocka_unit_test(output_not_reported_aggregates_per_device),
        cmocka_unit_test(optional_rules_off_by_default),
        cmocka_unit_test(open_exam_is_provisional),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
