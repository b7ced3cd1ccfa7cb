/* Unit tests of the backfill's parsing and time window: the PACS address,
 * study dates, the window (also across midnight) and the wait until it
 * opens. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "backfill/backfill.h"

static void source_forms(void **state)
{
    (void)state;
    backfill_settings settings;
    mitilog_error error;
    memset(&settings, 0, sizeof settings);
    /* AE title up to 16 characters (PS3.5 section 6.2, VR AE) */
    assert_int_equal(backfill_parse_source("ARCHIVE@pacs.example.org:104", &settings, &error),
                     MITILOG_OK);
    assert_string_equal(settings.source_ae_title, "ARCHIVE");
    assert_string_equal(settings.source_host, "pacs.example.org");
    assert_int_equal(settings.source_port, 104);
    assert_int_equal(backfill_parse_source("SIXTEEN_CHARS_AE@h:1", &settings, &error), MITILOG_OK);
    assert_int_equal(backfill_parse_source("SEVENTEEN_CHARS_A@h:1", &settings, &error),
                     MITILOG_ERROR_INVALID);
    assert_non_null(strstr(error.text, "longer than 16"));
    /* common practice, no source: TCP ports 1-65535 */
    assert_int_equal(backfill_parse_source("A@h:0", &settings, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_source("A@h:65536", &settings, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_source("A@h:", &settings, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_source("@h:104", &settings, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_source("A@:104", &settings, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_source("h:104", &settings, &error), MITILOG_ERROR_INVALID);
    assert_non_null(strstr(error.text, "AE@HOST:PORT"));
}

static void dates(void **state)
{
    (void)state;
    char out[9];
    mitilog_error error;
    /* DICOM DA is YYYYMMDD (PS3.5 section 6.2); ISO 8601 dates accepted */
    assert_int_equal(backfill_parse_date("2026-11-02", out, &error), MITILOG_OK);
    assert_string_equal(out, "20261102");
    assert_int_equal(backfill_parse_date("20240229", out, &error), MITILOG_OK);
    /* 2025 is not a leap year (Gregorian calendar) */
    assert_int_equal(backfill_parse_date("2025-02-29", out, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_date("2026-13-01", out, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_date("2026-1-1", out, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_date("yesterday", out, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_date("202611021", out, &error), MITILOG_ERROR_INVALID);
}

static void window_forms(void **state)
{
    (void)state;
    backfill_settings settings;
    mitilog_error error;
    assert_int_equal(backfill_parse_window("20:00-06:00", &settings, &error), MITILOG_OK);
    assert_int_equal(settings.window_start_minute, 20 * 60);
    assert_int_equal(settings.window_end_minute, 6 * 60);
    assert_int_equal(backfill_parse_window("", &settings, &error), MITILOG_OK);
    assert_int_equal(settings.window_start_minute, -1);
    assert_int_equal(backfill_parse_window("24:00-06:00", &settings, &error),
                     MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_window("8:00-06:00", &settings, &error), MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_window("06:00-06:00", &settings, &error),
                     MITILOG_ERROR_INVALID);
    assert_int_equal(backfill_parse_window("nights", &settings, &error), MITILOG_ERROR_INVALID);
}

/* common practice, no source: a window from 20:00 to 06:00 holds the
 * night across midnight; its end is excluded. */
static void window_wait(void **state)
{
    (void)state;
    int night_start = 20 * 60, night_end = 6 * 60;
    assert_int_equal(backfill_window_wait_seconds(night_start, night_end, 23 * 60), 0);
    assert_int_equal(backfill_window_wait_seconds(night_start, night_end, 2 * 60), 0);
    assert_int_equal(backfill_window_wait_seconds(night_start, night_end, 20 * 60), 0);
    assert_int_equal(backfill_window_wait_seconds(night_start, night_end, 6 * 60), 14 * 3600);
    assert_int_equal(backfill_window_wait_seconds(night_start, night_end, 19 * 60 + 59), 60);
    /* a window within one day */
    assert_int_equal(backfill_window_wait_seconds(9 * 60, 17 * 60, 12 * 60), 0);
    assert_int_equal(backfill_window_wait_seconds(9 * 60, 17 * 60, 17 * 60), 16 * 3600);
    assert_int_equal(backfill_window_wait_seconds(9 * 60, 17 * 60, 8 * 60), 3600);
    /* no window: never waits */
    assert_int_equal(backfill_window_wait_seconds(-1, -1, 3 * 60), 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(source_forms),
        cmocka_unit_test(dates),
        cmocka_unit_test(window_forms),
        cmocka_unit_test(window_wait),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
