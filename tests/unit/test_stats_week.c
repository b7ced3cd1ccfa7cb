/* ISO weeks, weekly outliers, period statistics and drift
 * (stats_calendar.h, stats_outliers.h, stats_period.h, stats_drift.h).
 * ISO week expectations were printed by Python 3.11:
 *   date.fromisoformat(D).isocalendar(), date.fromisocalendar(Y, W, 1)
 *   2026-12-28 -> (2026, 53); 2027-01-03 -> (2026, 53); 2027-01-04 -> (2027, 1)
 *   2026-01-01 -> (2026, 1); 2025-12-29 -> (2026, 1); 2024-12-30 -> (2025, 1)
 *   2021-01-03 -> (2020, 53); 2026-11-16 and 2026-11-22 -> (2026, 47)
 *   fromisocalendar(2026, 53, 1) = 2026-12-28; (2027, 1, 1) = 2027-01-04;
 *   (2026, 1, 1) = 2025-12-29; (2025, 53, 1) -> ValueError "Invalid week: 53"
 * Robust z, hand-worked (docs/domain.md section 5): baseline
 *   [1.0, 1.1, 1.2, 1.2, 1.3, 1.4, 1.9]: median 1.2; |x - 1.2| sorted
 *   [0, 0, 0.1, 0.1, 0.2, 0.2, 0.7]: MAD 0.1; P95 (type 7, Python
 *   quantiles(n=20, method='inclusive')[18]) = 1.75.
 *   x = 1.8: z = 0.6 / (1.4826 x 0.1) = 4.0469 -> outlier (and > P95);
 *   x = 1.5: z = 2.0235, 1.5 < 1.75 -> not an outlier. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "stats/stats_calendar.h"
#include "stats/stats_drift.h"
#include "stats/stats_exam.h"
#include "stats/stats_outliers.h"
#include "stats/stats_period.h"

#define assert_close(actual, expected, tolerance)                                                  \
    do {                                                                                           \
        double actual_value = (actual), expected_value = (expected);                               \
        if (fabs(actual_value - expected_value) > (tolerance))                                     \
            fail_msg("%.15g != %.15g", actual_value, expected_value);                              \
    } while (0)

static void iso_weeks_match_python(void **state)
{
    (void)state;
    const struct {
        const char *date;
        int year, week;
    } cases[] = {{"2026-12-28", 2026, 53}, {"2027-01-03", 2026, 53}, {"2027-01-04", 2027, 1},
                 {"2026-01-01", 2026, 1},  {"2025-12-29", 2026, 1},  {"2024-12-30", 2025, 1},
                 {"2021-01-03", 2020, 53}, {"2026-11-16", 2026, 47}, {"2026-11-22", 2026, 47}};
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        long day;
        int year, week;
        assert_int_equal(stats_day_number(cases[i].date, &day), MITILOG_OK);
        stats_iso_week_of_day(day, &year, &week);
        assert_int_equal(year, cases[i].year);
        assert_int_equal(week, cases[i].week);
        char text[11];
        stats_day_text(day, text);
        assert_string_equal(text, cases[i].date);
    }
    assert_int_equal(stats_iso_weeks_in_year(2026), 53);
    assert_int_equal(stats_iso_weeks_in_year(2025), 52);
    assert_int_equal(stats_iso_weeks_in_year(2020), 53);
}

static void iso_week_parse_and_monday(void **state)
{
    (void)state;
    int year, week;
    long monday;
    char text[11];
    assert_int_equal(stats_iso_week_parse("2026-W53", &year, &week), MITILOG_OK);
    assert_int_equal(stats_iso_week_monday(year, week, &monday), MITILOG_OK);
    stats_day_text(monday, text);
    assert_string_equal(text, "2026-12-28");
    assert_int_equal(stats_iso_week_parse("2027-W01", &year, &week), MITILOG_OK);
    assert_int_equal(stats_iso_week_monday(year, week, &monday), MITILOG_OK);
    stats_day_text(monday, text);
    assert_string_equal(text, "2027-01-04");
    assert_int_equal(stats_iso_week_monday(2026, 1, &monday), MITILOG_OK);
    stats_day_text(monday, text);
    assert_string_equal(text, "2025-12-29");
    assert_int_equal(stats_iso_week_parse("2025-W53", &year, &week), MITILOG_ERROR_INVALID);
    assert_int_equal(stats_iso_week_parse("2026-W00", &year, &week), MITILOG_ERROR_INVALID);
    assert_int_equal(stats_iso_week_parse("2026-48", &year, &week), MITILOG_ERROR_INVALID);
    assert_int_equal(stats_iso_week_parse("2026-W4x", &year, &week), MITILOG_ERROR_INVALID);
    long day;
    assert_int_equal(stats_day_number("2026-02-29", &day), MITILOG_ERROR_INVALID);
    assert_int_equal(stats_day_number("2024-02-29", &day), MITILOG_OK);
    assert_int_equal(stats_day_number("2026-13-01", &day), MITILOG_ERROR_INVALID);
    char week_text[9];
    stats_iso_week_text(2026, 8, week_text);
    assert_string_equal(week_text, "2026-W08");
}

static exam_row exam(const char *day, const char *type, const char *preset, const char *room,
                     double value)
{
    exam_row e;
    memset(&e, 0, sizeof e);
    e.study_instance_uid = "1.2.3";
    e.day = day;
    e.exam_type = type;
    e.preset = preset;
    e.room = room;
    e.shift = "day";
    e.max_governing = value;
    e.has_governing = 1;
    e.max_mi = 1.0;
    e.has_mi = 1;
    e.capture_count = 10;
    e.indexed_count = 10;
    return e;
}

static void outliers_hand_worked(void **state)
{
    (void)state;
    const double values[] = {1.0, 1.1, 1.2, 1.2, 1.3, 1.4, 1.9};
    exam_row baseline[7];
    for (int i = 0; i < 7; i++)
        baseline[i] = exam("2026-11-09", "abdomen", "Abdomen General", "Room 1", values[i]);
    exam_row week[3] = {exam("2026-11-16", "abdomen", "Abdomen General", "Room 2", 1.8),
                        exam("2026-11-17", "abdomen", "Renal", "Room 1", 1.5),
                        exam("2026-11-18", "abdomen", "Renal", "Room 1", 1.2)};
    static const exam_rule_count rules[] = {{"ti_ceiling", 1}, {"dwell_general", 2}};
    week[2].rules = rules;
    week[2].rule_count = 2;
    week[2].finding_count = 3;
    stats_week_settings settings = stats_week_default_settings();
    settings.minimum_baseline = 5;
    stats_week_result result;
    assert_int_equal(
        stats_week_outliers(week, 3, baseline, 7, &settings, STATS_BY_PRESET, &result, NULL),
        MITILOG_OK);
    assert_int_equal(result.baseline_count, 1);
    assert_false(result.any_thin);
    assert_close(result.baselines[0].median, 1.2, 1e-12);
    assert_close(result.baselines[0].mad, 0.1, 1e-12);
    assert_close(result.baselines[0].p95, 1.75, 1e-12);
    assert_true(result.flags[0].is_outlier);
    assert_true(result.flags[0].above_robust_z);
    assert_true(result.flags[0].above_p95);
    assert_close(result.flags[0].robust_z, 0.6 / (1.4826 * 0.1), 1e-9);
    assert_false(result.flags[1].is_outlier);
    assert_close(result.flags[1].robust_z, 0.3 / (1.4826 * 0.1), 1e-9);
    /* Groups ranked by outliers: Abdomen General (1 of 1) before Renal. */
    assert_int_equal(result.group_count, 2);
    assert_string_equal(result.groups[0].key, "Abdomen General");
    assert_int_equal(result.groups[0].outlier_count, 1);
    assert_close(result.groups[0].outlier_rate, 1.0, 1e-12);
    const stats_group *renal = &result.groups[1];
    assert_string_equal(renal->key, "Renal");
    assert_int_equal(renal->exam_count, 2);
    assert_close(renal->median_governing, 1.35, 1e-12);
    /* Department median over the week's abdomen exams: 1.2, 1.5, 1.8. */
    assert_close(renal->department_median, 1.5, 1e-12);
    /* Findings by rule, sorted by rule id; the exam with findings listed first. */
    assert_int_equal(renal->finding_count, 3);
    assert_int_equal(renal->rule_count, 2);
    assert_string_equal(renal->rules[0].rule_id, "dwell_general");
    assert_int_equal(renal->rules[0].count, 2);
    assert_int_equal(renal->members[0], 2);
    stats_week_result_free(&result);

    /* Grouped by room instead. */
    assert_int_equal(
        stats_week_outliers(week, 3, baseline, 7, &settings, STATS_BY_ROOM, &result, NULL),
        MITILOG_OK);
    assert_string_equal(result.groups[0].key, "Room 2");
    stats_week_result_free(&result);
}

static void thin_baseline_adds_the_week(void **state)
{
    (void)state;
    exam_row week[4] = {exam("2026-11-02", "carotid", "Carotid", "Room 3", 0.9),
                        exam("2026-11-02", "carotid", "Carotid", "Room 3", 1.0),
                        exam("2026-11-03", "carotid", "Carotid", "Room 3", 1.1),
                        exam("2026-11-04", "carotid", NULL, NULL, 0.0)};
    week[3].has_governing = 0;
    stats_week_result result;
    assert_int_equal(stats_week_outliers(week, 4, NULL, 0, NULL, STATS_BY_PRESET, &result, NULL),
                     MITILOG_OK);
    assert_true(result.any_thin);
    assert_true(result.baselines[0].thin);
    assert_int_equal(result.baselines[0].trailing_count, 0);
    assert_int_equal(result.baselines[0].count, 3);
    assert_false(result.flags[3].has_value);
    /* NULL key (not recorded) sorts last among equal ranks. */
    assert_int_equal(result.group_count, 2);
    assert_null(result.groups[1].key);
    stats_week_result_free(&result);
}

static void period_table_by_exam_type(void **state)
{
    (void)state;
    /* Python: statistics.quantiles([0.4,1.2,0.9,2.3,0.7,1.1,1.5,0.3,0.8,1.0,1.9],
     * n=4, method='inclusive') -> [0.75, 1.0, 1.35]; P95 2.1 (test_stats.c). */
    const double values[] = {0.4, 1.2, 0.9, 2.3, 0.7, 1.1, 1.5, 0.3, 0.8, 1.0, 1.9};
    exam_row exams[12];
    for (int i = 0; i < 11; i++) {
        exams[i] = exam("2026-11-10", "abdomen", "Abdomen General", "Room 1", values[i]);
        exams[i].seconds_at_or_above[1] = values[i] >= 1.0 ? 60.0 : 0.0;
    }
    exams[11] = exam("2026-11-10", "carotid", "Carotid", "Room 3", 0.5);
    exams[11].finding_count = 1;
    stats_period_result result;
    assert_int_equal(stats_period_table(exams, 12, STATS_BY_EXAM_TYPE, &result, NULL), MITILOG_OK);
    assert_int_equal(result.row_count, 2);
    const stats_period_row *abdomen = &result.rows[0];
    assert_string_equal(abdomen->key, "abdomen");
    assert_int_equal(abdomen->exam_count, 11);
    assert_close(abdomen->governing.median, 1.0, 1e-12);
    assert_close(abdomen->governing.p25, 0.75, 1e-12);
    assert_close(abdomen->governing.p75, 1.35, 1e-12);
    assert_close(abdomen->governing.p95, 2.1, 1e-12);
    assert_int_equal(abdomen->thresholds[1].exam_count, 6);
    assert_close(abdomen->thresholds[1].threshold, 1.0, 0);
    assert_close(result.rows[1].share_with_findings, 1.0, 1e-12);
    assert_int_equal(result.total.exam_count, 12);
    assert_int_equal(result.total.with_findings_count, 1);
    stats_period_result_free(&result);
}

static void drift_flags_a_step(void **state)
{
    (void)state;
    /* Preset "Abdomen General" in Room 2: weeks 45 and 46 around 1.0
     * (offsets -0.1, -0.1, 0, 0.1, 0.1), week 47 around 1.6; the 2-week baseline of week 47 has
     * median 1.0 and MAD 0.1, so z = 0.6 / (1.4826 x 0.1 x 1.2533 / sqrt(5))
     * = 7.22 -> flagged. */
    static const char *days[3] = {"2026-11-02", "2026-11-09", "2026-11-16"};
    const double offsets[5] = {-0.1, -0.1, 0.0, 0.1, 0.1};
    exam_row exams[15];
    for (int w = 0; w < 3; w++) {
        for (int i = 0; i < 5; i++)
            exams[w * 5 + i] = exam(days[w], "abdomen", "Abdomen General", "Room 2",
                                    (w == 2 ? 1.6 : 1.0) + offsets[i]);
    }
    long monday;
    assert_int_equal(stats_iso_week_monday(2026, 45, &monday), MITILOG_OK);
    stats_drift_result result;
    assert_int_equal(stats_drift(exams, 15, monday, 3, 2, 5, 3.0, &result, NULL), MITILOG_OK);
    assert_int_equal(result.series_count, 1);
    const stats_drift_series *series = &result.series[0];
    assert_false(series->points[0].has_z); /* no baseline */
    assert_true(series->points[1].has_z);  /* week 46 against week 45 */
    assert_close(series->points[1].z, 0.0, 1e-9);
    assert_false(series->points[1].flagged);
    assert_int_equal(series->points[2].iso_week, 47);
    assert_true(series->points[2].has_z);
    assert_close(series->points[2].baseline_median, 1.0, 1e-12);
    assert_close(series->points[2].z, 0.6 / (1.4826 * 0.1 * 1.2533 / sqrt(5.0)), 1e-6);
    assert_true(series->points[2].flagged);
    assert_int_equal(series->flagged_count, 1);
    stats_drift_result_free(&result);
}

static void drift_shows_a_drop_and_a_thin_week_unflagged(void **state)
{
    (void)state;
    /* The mirror of drift_flags_a_step: week 47 around 0.4 instead of
     * 1.6, z = -7.22: shown, not flagged (lower output is what ALARA asks
     * for). Then week 47 with 1.6 in only 2 exams (fewer than
     * STATS_DRIFT_WEEK_MINIMUM): z = 0.6 / (1.4826 x 0.1 x 1.2533 /
     * sqrt(2)) = 4.57, still not flagged. Common practice, no source. */
    static const char *days[3] = {"2026-11-02", "2026-11-09", "2026-11-16"};
    const double offsets[5] = {-0.1, -0.1, 0.0, 0.1, 0.1};
    exam_row exams[15];
    for (int w = 0; w < 3; w++) {
        for (int i = 0; i < 5; i++)
            exams[w * 5 + i] = exam(days[w], "abdomen", "Abdomen General", "Room 2",
                                    (w == 2 ? 0.4 : 1.0) + offsets[i]);
    }
    long monday;
    assert_int_equal(stats_iso_week_monday(2026, 45, &monday), MITILOG_OK);
    stats_drift_result result;
    assert_int_equal(stats_drift(exams, 15, monday, 3, 2, 5, 3.0, &result, NULL), MITILOG_OK);
    const stats_drift_series *series = &result.series[0];
    assert_true(series->points[2].has_z);
    assert_close(series->points[2].z, -0.6 / (1.4826 * 0.1 * 1.2533 / sqrt(5.0)), 1e-6);
    assert_false(series->points[2].flagged);
    assert_int_equal(series->flagged_count, 0);
    assert_close(series->max_abs_z, 0.6 / (1.4826 * 0.1 * 1.2533 / sqrt(5.0)), 1e-6);
    stats_drift_result_free(&result);

    for (int i = 0; i < 2; i++)
        exams[10 + i] = exam(days[2], "abdomen", "Abdomen General", "Room 2", 1.6);
    assert_int_equal(stats_drift(exams, 12, monday, 3, 2, 5, 3.0, &result, NULL), MITILOG_OK);
    series = &result.series[0];
    assert_int_equal(series->points[2].count, 2);
    assert_close(series->points[2].z, 0.6 / (1.4826 * 0.1 * 1.2533 / sqrt(2.0)), 1e-6);
    assert_false(series->points[2].flagged);
    stats_drift_result_free(&result);
}

static void dimension_names(void **state)
{
    (void)state;
    stats_dimension dimension;
    assert_int_equal(stats_dimension_parse("shift", &dimension), 0);
    assert_int_equal(dimension, STATS_BY_SHIFT);
    assert_string_equal(stats_dimension_name(STATS_BY_TRANSDUCER), "transducer");
    assert_int_equal(stats_dimension_parse("operator", &dimension), -1);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(iso_weeks_match_python),
        cmocka_unit_test(iso_week_parse_and_monday),
        cmocka_unit_test(outliers_hand_worked),
        cmocka_unit_test(thin_baseline_adds_the_week),
        cmocka_unit_test(period_table_by_exam_type),
        cmocka_unit_test(drift_shows_a_drop_and_a_thin_week_unflagged),
        cmocka_unit_test(drift_flags_a_step),
        cmocka_unit_test(dimension_names),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
