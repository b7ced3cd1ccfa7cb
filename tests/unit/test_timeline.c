/* The exam timeline estimate on hand-computed exams (rule: domain
 * reference "Exam timeline": interval since the previous capture,
 * attributed to this capture, capped; cine adds frames x frame time). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

/* cmocka 1.1's assert_float_equal works in single precision; times here
 * are ~6e10 s, so compare in double. */
#define assert_close(actual, expected, tolerance)                                                  \
    do {                                                                                           \
        double actual_value = (actual), expected_value = (expected);                               \
        if (!(actual_value - expected_value <= (tolerance) &&                                      \
              expected_value - actual_value <= (tolerance)))                                       \
            fail_msg("%.9f != %.9f", actual_value, expected_value);                                \
    } while (0)

#include "extract/ext_timeline.h"

static exam_capture capture_at(double seconds, double cine_seconds, double tib)
{
    exam_capture capture;
    memset(&capture, 0, sizeof capture);
    capture.time_seconds = seconds;
    capture.has_time = 1;
    capture.cine_seconds = cine_seconds;
    capture.indices[EXAM_INDEX_TIB].status = EXAM_VALUE_OK;
    capture.indices[EXAM_INDEX_TIB].value = tib;
    return capture;
}

/* Hand-worked: captures at 0 s, 60 s and 600 s; the third is a cine of 10
 * frames x 40 ms = 0.4 s. Intervals: 0, 60, 540 -> capped to 300.
 * Attributed: 0, 60, 300.4; total 360.4 s; span 600 s. */
static void capped_gap_and_cine(void **state)
{
    (void)state;
    exam_capture captures[3] = {capture_at(0, 0, 0.5), capture_at(60, 0, 1.2),
                                capture_at(600, 0.4, 1.6)};
    ext_timeline_entry entries[3];
    ext_timeline_summary summary;
    ext_timeline_build(captures, 3, 0, 0, entries, &summary);
    assert_int_equal(summary.entry_count, 3);
    assert_int_equal(summary.capped_count, 1);
    assert_close(entries[0].attributed_seconds, 0.0, 1e-9);
    assert_close(entries[1].attributed_seconds, 60.0, 1e-9);
    assert_close(entries[2].attributed_seconds, 300.4, 1e-9);
    assert_true(entries[2].capped);
    assert_close(summary.estimated_seconds, 360.4, 1e-9);
    assert_close(summary.span_seconds, 600.0, 1e-9);
    /* Time at or above each threshold, by hand: >= 1.0: 60 + 300.4;
     * >= 1.5: 300.4; >= 2.0: 0; >= 0.5: everything (0.5 counts: "at or
     * above"). */
    assert_close(ext_timeline_time_at_or_above(captures, entries, 3, EXAM_INDEX_TIB, 1.0), 360.4,
                 1e-9);
    assert_close(ext_timeline_time_at_or_above(captures, entries, 3, EXAM_INDEX_TIB, 1.5), 300.4,
                 1e-9);
    assert_close(ext_timeline_time_at_or_above(captures, entries, 3, EXAM_INDEX_TIB, 2.0), 0.0,
                 1e-9);
    assert_close(ext_timeline_time_at_or_above(captures, entries, 3, EXAM_INDEX_TIB, 0.5), 360.4,
                 1e-9);
    assert_close(ext_timeline_time_unreported(captures, entries, 3, EXAM_INDEX_TIC), 360.4, 1e-9);
}

/* Arrival order must not matter: the same exam given as [600, 0, 60]. */
static void out_of_order_arrival(void **state)
{
    (void)state;
    exam_capture captures[3] = {capture_at(600, 0.4, 1.6), capture_at(0, 0, 0.5),
                                capture_at(60, 0, 1.2)};
    ext_timeline_entry entries[3];
    ext_timeline_summary summary;
    ext_timeline_build(captures, 3, 0, 0, entries, &summary);
    assert_int_equal(entries[0].capture, 1);
    assert_int_equal(entries[1].capture, 2);
    assert_int_equal(entries[2].capture, 0);
    assert_close(summary.estimated_seconds, 360.4, 1e-9);
}

/* A configured cap of 120 s: intervals 0, 60, 120 (+0.4 cine) = 180.4. */
static void configured_cap(void **state)
{
    (void)state;
    exam_capture captures[3] = {capture_at(0, 0, 0.5), capture_at(60, 0, 1.2),
                                capture_at(600, 0.4, 1.6)};
    ext_timeline_entry entries[3];
    ext_timeline_summary summary;
    ext_timeline_build(captures, 3, 120, 0, entries, &summary);
    assert_close(summary.estimated_seconds, 180.4, 1e-9);
}

/* An SR scan time of 180.2 s bounds the 360.4 s estimate: scale 0.5. */
static void scan_time_bound(void **state)
{
    (void)state;
    exam_capture captures[3] = {capture_at(0, 0, 0.5), capture_at(60, 0, 1.2),
                                capture_at(600, 0.4, 1.6)};
    ext_timeline_entry entries[3];
    ext_timeline_summary summary;
    ext_timeline_build(captures, 3, 0, 180.2, entries, &summary);
    assert_close(summary.scale, 0.5, 1e-12);
    assert_close(summary.estimated_seconds, 180.2, 1e-9);
    assert_close(summary.unscaled_seconds, 360.4, 1e-9);
    assert_close(entries[1].attributed_seconds, 30.0, 1e-9);
    /* A bound longer than the estimate changes nothing. */
    ext_timeline_build(captures, 3, 0, 1000, entries, &summary);
    assert_close(summary.scale, 1.0, 0);
}

/* A capture without a time is left out and counted, not guessed. */
static void untimed_capture(void **state)
{
    (void)state;
    exam_capture captures[3] = {capture_at(0, 0, 0.5), capture_at(30, 0, 1.2),
                                capture_at(90, 0, 1.6)};
    captures[1].has_time = 0;
    ext_timeline_entry entries[3];
    ext_timeline_summary summary;
    ext_timeline_build(captures, 3, 0, 0, entries, &summary);
    assert_int_equal(summary.entry_count, 2);
    assert_int_equal(summary.untimed_count, 1);
    assert_close(summary.estimated_seconds, 90.0, 1e-9);
}

/* Reference: Python's datetime: date(1970,1,1).toordinal() == 719163,
 * ordinal 1 being 0001-01-01, so 1970-01-01 is 719162 days after it. */
static void iso_to_seconds(void **state)
{
    (void)state;
    assert_close(ext_iso_to_seconds("1970-01-01T00:00:00"), 719162.0 * 86400.0, 0);
    assert_close(ext_iso_to_seconds("2026-11-23T14:05:12") -
                     ext_iso_to_seconds("2026-11-23T14:00:00"),
                 312.0, 1e-9);
    assert_close(ext_iso_to_seconds("2026-11-24T00:01:00") -
                     ext_iso_to_seconds("2026-11-23T23:59:00"),
                 120.0, 1e-9);
    assert_close(ext_iso_to_seconds("2024-03-01T00:00:00") -
                     ext_iso_to_seconds("2024-02-28T00:00:00"),
                 2 * 86400.0, 1e-9); /* 2024 is a leap year */
    assert_close(ext_iso_to_seconds("2026-11-23T14:00:00+01:00"),
                 ext_iso_to_seconds("2026-11-23T13:00:00"), 1e-9);
    assert_close(ext_iso_to_seconds("2026-11-23T14:00:00.25") -
                     ext_iso_to_seconds("2026-11-23T14:00:00"),
                 0.25, 1e-9);
    assert_true(ext_iso_to_seconds("yesterday") < 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(capped_gap_and_cine), cmocka_unit_test(out_of_order_arrival),
        cmocka_unit_test(configured_cap),      cmocka_unit_test(scan_time_bound),
        cmocka_unit_test(untimed_capture),     cmocka_unit_test(iso_to_seconds),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
