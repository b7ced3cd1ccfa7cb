/* The parsers behind the HTTP parameter checker (http_parameters.c) and
 * the login throttle (http_throttle.c). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include <cmocka.h>

#include "http/http_internal.h"
#include "http/http_throttle.h"

static void calendar_dates(void **state)
{
    (void)state;
    long day;
    /* Day numbers since 1970-01-01 (POSIX epoch, IEEE Std 1003.1 4.16:
     * 2000-03-01 is 11017 days after it; 1900-01-01 is 25567 before). */
    assert_true(http_parse_date("1970-01-01", &day));
    assert_int_equal(day, 0);
    assert_true(http_parse_date("2000-03-01", &day));
    assert_int_equal(day, 11017);
    assert_true(http_parse_date("1900-01-01", &day));
    assert_int_equal(day, -25567);
    /* Gregorian leap years (RFC 3339 5.7 and Appendix C): 2000 and 2024 yes, 1900
     * and 2026 no. */
    assert_true(http_parse_date("2000-02-29", &day));
    assert_true(http_parse_date("2024-02-29", &day));
    assert_false(http_parse_date("1900-02-29", &day));
    assert_false(http_parse_date("2026-02-29", &day));
    assert_false(http_parse_date("2026-02-31", &day));
    assert_false(http_parse_date("2026-04-31", &day));
    assert_false(http_parse_date("2026-13-45", &day));
    assert_false(http_parse_date("2026-00-01", &day));
    assert_false(http_parse_date("2026-01-00", &day));
    /* The API's years: 1900 to 9998 (docs/api.md, "Parameters"). */
    assert_false(http_parse_date("1899-12-31", &day));
    assert_true(http_parse_date("9998-12-31", &day));
    assert_false(http_parse_date("9999-01-01", &day));
    assert_false(http_parse_date("0000-01-01", &day));
    assert_false(http_parse_date("2026-1-01", &day));
    assert_false(http_parse_date("2026-01-01 ", &day));
    assert_false(http_parse_date("", &day));
    assert_false(http_parse_date(NULL, &day));
}

static void instants(void **state)
{
    (void)state;
    char out[HTTP_INSTANT_SIZE];
    /* RFC 3339 5.8 examples: 1985-04-12T23:20:50.52Z and
     * 1996-12-19T16:39:57-08:00 (= 1996-12-20T00:39:57Z). */
    assert_true(http_parse_instant("1985-04-12T23:20:50.52Z", out));
    assert_string_equal(out, "1985-04-12T23:20:50.520Z");
    assert_true(http_parse_instant("1996-12-19T16:39:57-08:00", out));
    assert_string_equal(out, "1996-12-20T00:39:57.000Z");
    /* A '+' that arrived as a space (unescaped in the URL). */
    assert_true(http_parse_instant("2026-03-01T01:30:00 02:00", out));
    assert_string_equal(out, "2026-02-28T23:30:00.000Z");
    assert_true(http_parse_instant("2024-03-01T01:30+0200", out));
    assert_string_equal(out, "2024-02-29T23:30:00.000Z");
    /* No offset: UTC (docs/api.md). A date: its midnight. */
    assert_true(http_parse_instant("2026-12-03T09:51:12", out));
    assert_string_equal(out, "2026-12-03T09:51:12.000Z");
    assert_true(http_parse_instant("2026-12-03", out));
    assert_string_equal(out, "2026-12-03T00:00:00.000Z");
    /* "At or after" a fraction of a millisecond: the next millisecond. */
    assert_true(http_parse_instant("2026-12-31T23:59:59.9991Z", out));
    assert_string_equal(out, "2027-01-01T00:00:00.000Z");
    assert_true(http_parse_instant("2026-12-03T09:51:12.345000Z", out));
    assert_string_equal(out, "2026-12-03T09:51:12.345Z");
    /* Impossible fields (RFC 3339 5.6/5.7). */
    const char *bad[] = {"2026-13-45",
                         "2026-02-30T10:00:00Z",
                         "2026-01-01T24:00:00Z",
                         "2026-01-01T10:60Z",
                         "2026-01-01T10:00:60Z",
                         "2026-01-01T10:00+24:00",
                         "2026-01-01T10:00+02:60",
                         "2026-01-01T10:00+2",
                         "2026-01-01T10:00+",
                         "2026-01-01T10",
                         "2026-01-01T10:00:00.Z",
                         "2026-01-01T10:00ZZ",
                         "2026-01-01Z",
                         "1900-01-01T00:30+01:00",
                         "9998-12-31T23:30-01:00",
                         "20260101",
                         ""};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        if (http_parse_instant(bad[i], out))
            fail_msg("accepted %s as %s", bad[i], out);
    }
}

static void throttle(void **state)
{
    (void)state;
    http_throttle *table = NULL;
    mitilog_error error;
    assert_int_equal(http_throttle_create(&table, &error), MITILOG_OK);
    unsigned by_address, by_user;
    /* common practice, no source (OWASP Authentication Cheat Sheet,
     * "Login Throttling"): four free failures; from the fifth on, waits of
     * 1, 2, 4 ... s. */
    for (int i = 1; i <= 4; i++) {
        http_throttle_failed(table, "10.0.0.1", "lead", 100.0, &by_address, &by_user);
        assert_int_equal(by_address, (unsigned)i);
        assert_int_equal(http_throttle_wait(table, "10.0.0.1", "lead", 100.0), 0);
    }
    http_throttle_failed(table, "10.0.0.1", "lead", 100.0, &by_address, &by_user);
    assert_int_equal(by_user, 5);
    assert_int_equal(http_throttle_wait(table, "10.0.0.1", "lead", 100.0), 1);
    assert_int_equal(http_throttle_wait(table, "10.0.0.2", "lead", 100.0), 1);  /* per user */
    assert_int_equal(http_throttle_wait(table, "10.0.0.1", "nurse", 100.0), 1); /* per address */
    assert_int_equal(http_throttle_wait(table, "10.0.0.1", "lead", 100.5), 1);  /* rounded up */
    assert_int_equal(http_throttle_wait(table, "10.0.0.2", "nurse", 100.0), 0);
    assert_int_equal(http_throttle_wait(table, "10.0.0.1", "lead", 101.5), 0);
    http_throttle_failed(table, "10.0.0.1", "lead", 102.0, &by_address, &by_user);
    assert_int_equal(http_throttle_wait(table, "10.0.0.1", NULL, 102.0), 2);
    for (int i = 0; i < 20; i++)
        http_throttle_failed(table, "10.0.0.1", "lead", 200.0, &by_address, &by_user);
    assert_int_equal(http_throttle_wait(table, "10.0.0.1", NULL, 200.0), 300); /* the cap */
    /* Forgotten an hour after the last failure. */
    http_throttle_failed(table, "10.0.0.1", "lead", 4000.0, &by_address, &by_user);
    assert_int_equal(by_address, 1);
    /* A success clears the counts. */
    for (int i = 0; i < 3; i++)
        http_throttle_failed(table, "10.0.0.9", "nurse", 5000.0, &by_address, &by_user);
    http_throttle_succeeded(table, "10.0.0.9", "nurse");
    http_throttle_failed(table, "10.0.0.9", "nurse", 5000.0, &by_address, &by_user);
    assert_int_equal(by_address, 1);
    assert_int_equal(by_user, 1);
    /* Many names: the table stays bounded and keeps working. */
    char name[32];
    for (int i = 0; i < 10000; i++) {
        snprintf(name, sizeof name, "name%d", i);
        http_throttle_failed(table, "10.0.0.3", name, 6000.0 + i, &by_address, &by_user);
        assert_int_equal(by_user, 1);
    }
    http_throttle_free(table);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(calendar_dates),
        cmocka_unit_test(instants),
        cmocka_unit_test(throttle),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
