/* The notification's contents and retry schedule (src/notify/notify.h):
 * the JSON document carries the study key as the API defines it (first 8
 * hex digits of SHA-256 of the UID, docs/api.md; the digest of "1.2.3" is
 * computed here with OpenSSL's one-shot SHA256() as the reference), no
 * field that could hold a patient's name or ID, and the syslog text is one
 * line whose values with spaces are quoted (its study key, c47f5b18, from
 * Python's hashlib.sha256(b"1.2.3")). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>
#include <openssl/sha.h>

#include "notify/notify.h"

static store_notification example(void)
{
    store_notification row;
    memset(&row, 0, sizeof row);
    row.id = 7;
    row.channel = "webhook";
    row.study_instance_uid = "1.2.3";
    row.accession_number = "ACC 1";
    row.room = "Room \"B\"\n2";
    row.preset = "Abdomen General";
    row.rule_id = "equipment_maxima";
    row.severity = "violation";
    row.quantity = "mi";
    row.has_value = 1;
    row.measured_value = 2.5;
    row.has_limit = 1;
    row.limit_value = 1.9;
    row.started_at = "2026-11-20T09:00:00";
    row.created_at = "2026-11-20T09:01:00.000Z";
    return row;
}

static void document_fields(void **state)
{
    (void)state;
    store_notification row = example();
    char *text = notify_document(&row, "Harbourside General", "https://mitilog.example.org/");
    assert_non_null(text);
    unsigned char digest[SHA256_DIGEST_LENGTH];
    SHA256((const unsigned char *)"1.2.3", 5, digest);
    char key[32];
    snprintf(key, sizeof key, "\"study_key\":\"%02x%02x%02x%02x\"", digest[0], digest[1], digest[2],
             digest[3]);
    assert_non_null(strstr(text, key));
    assert_non_null(strstr(text, "\"value\":2.5,"));
    assert_non_null(strstr(text, "\"limit\":1.9,"));
    /* one slash between the base and the page (common practice, no source) */
    assert_non_null(strstr(text, "\"link\":\"https://mitilog.example.org/exam.html?study=1.2.3\""));
    /* RFC 8259 section 7: quote and line feed escaped */
    assert_non_null(strstr(text, "\"room\":\"Room \\\"B\\\"\\n2\""));
    assert_null(strstr(text, "patient"));
    free(text);
    /* no dashboard, no site: null, never an empty string */
    row.study_instance_uid = NULL;
    text = notify_document(&row, "", NULL);
    assert_non_null(strstr(text, "\"link\":null"));
    assert_non_null(strstr(text, "\"site\":null"));
    assert_non_null(strstr(text, "\"study_key\":null"));
    free(text);
}

static void syslog_line(void **state)
{
    (void)state;
    store_notification row = example();
    char text[1024];
    notify_syslog_text(&row, "Harbourside General", NULL, text, sizeof text);
    assert_string_equal(text, "ALARA violation: rule equipment_maxima quantity=mi value=2.5 "
                              "limit=1.9 study_key=c47f5b18 accession=\"ACC 1\" "
                              "room=\"Room ?B??2\" preset=\"Abdomen General\" "
                              "site=\"Harbourside General\" started_at=2026-11-20T09:00:00");
}

static void backoff(void **state)
{
    (void)state;
    /* doubling from the first wait, capped (common practice, no source) */
    assert_int_equal(notify_backoff_seconds(30, 3600, 1), 30);
    assert_int_equal(notify_backoff_seconds(30, 3600, 2), 60);
    assert_int_equal(notify_backoff_seconds(30, 3600, 3), 120);
    assert_int_equal(notify_backoff_seconds(30, 3600, 8), 3600);
    assert_int_equal(notify_backoff_seconds(30, 3600, 1000), 3600);
    assert_int_equal(notify_backoff_seconds(1, 2, 5), 2);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(document_fields),
        cmocka_unit_test(syslog_line),
        cmocka_unit_test(backoff),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
