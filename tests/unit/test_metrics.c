/* The metrics context and its text (src/metrics/metrics.h), checked
 * against the Prometheus text exposition format 0.0.4 as documented
 * ("Exposition formats": label values escape backslash, double quote and
 * line feed; histogram buckets are cumulative, le is "less than or equal",
 * the last bucket is le="+Inf" and equals _count) and against promtool
 * (Debian's prometheus package), the format's reference checker, when it
 * is installed. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

#include "metrics/metrics.h"

static char *escaped(const char *value)
{
    metrics_text text = {NULL, 0, 0, 0};
    metrics_text_label_value(&text, value);
    assert_false(text.failed);
    if (text.data == NULL)
        return strdup("");
    return text.data;
}

static void label_values_escape_the_three_characters(void **state)
{
    (void)state;
    /* Exposition formats, "Text format details": in label values a
     * backslash is \\, a double quote \" and a line feed \n. */
    char *text = escaped("a\\b\"c\nd");
    assert_string_equal(text, "a\\\\b\\\"c\\nd");
    free(text);
    /* nothing else changes: tabs, UTF-8 and braces pass as they are */
    text = escaped("mi\tÜber{x}=1,");
    assert_string_equal(text, "mi\tÜber{x}=1,");
    free(text);
    text = escaped("");
    assert_string_equal(text, "");
    free(text);
}

/* The value of the sample line that starts with prefix (a whole name
 * with its labels, followed by a space), or -1 when absent. */
static double sample(const char *text, const char *prefix)
{
    size_t length = strlen(prefix);
    for (const char *line = text; line != NULL && *line != '\0';) {
        if (strncmp(line, prefix, length) == 0 && line[length] == ' ')
            return strtod(line + length + 1, NULL);
        line = strchr(line, '\n');
        if (line != NULL)
            line++;
    }
    return -1;
}

static char *exposition(const metrics *m, const metrics_database *database)
{
    char *text = NULL;
    mitilog_error error = {{0}};
    if (metrics_exposition(m, database, "9.9.9", "north-wing", &text, &error) != MITILOG_OK)
        fail_msg("metrics_exposition: %s", error.text);
    return text;
}

static void histogram_buckets_are_cumulative(void **state)
{
    (void)state;
    metrics *m = NULL;
    assert_int_equal(metrics_create(&m, NULL), MITILOG_OK);
    /* le is "less than or equal": 0.005 falls in the 0.005 bucket */
    metrics_commit_observed(m, 0.0004);
    metrics_commit_observed(m, 0.005);
    metrics_commit_observed(m, 0.3);
    metrics_commit_observed(m, 42.0); /* past the largest bound: +Inf only */
    char *text = exposition(m, NULL);
    assert_true(sample(text, "mitilog_commit_duration_seconds_bucket{le=\"0.001\"}") == 1);
    assert_true(sample(text, "mitilog_commit_duration_seconds_bucket{le=\"0.0025\"}") == 1);
    assert_true(sample(text, "mitilog_commit_duration_seconds_bucket{le=\"0.005\"}") == 2);
    assert_true(sample(text, "mitilog_commit_duration_seconds_bucket{le=\"0.25\"}") == 2);
    assert_true(sample(text, "mitilog_commit_duration_seconds_bucket{le=\"0.5\"}") == 3);
    assert_true(sample(text, "mitilog_commit_duration_seconds_bucket{le=\"10\"}") == 3);
    assert_true(sample(text, "mitilog_commit_duration_seconds_bucket{le=\"+Inf\"}") == 4);
    assert_true(sample(text, "mitilog_commit_duration_seconds_count") == 4);
    /* the sum of the four, printed to the nanosecond */
    double sum = sample(text, "mitilog_commit_duration_seconds_sum");
    assert_true(sum > 42.3053 && sum < 42.3055);
    free(text);
    metrics_free(m);
}

static void counters_and_labels(void **state)
{
    (void)state;
    metrics *m = NULL;
    assert_int_equal(metrics_create(&m, NULL), MITILOG_OK);
    metrics_association_accepted(m);
    metrics_association_accepted(m);
    metrics_association_refused(m, METRICS_REFUSAL_CALLED_AE_TITLE);
    metrics_object_answered(m, 0x0000);
    metrics_object_answered(m, 0xC000);
    metrics_object_answered(m, 0xC000);
    metrics_bytes_received(m, 1000);
    metrics_bytes_received(m, 24);
    metrics_queue_set(m, METRICS_QUEUE_PIXEL_READING, 7);
    metrics_pixel_refused(m, METRICS_PIXEL_NO_PROFILE);
    /* NULL contexts are accepted and do nothing (import, tests) */
    metrics_association_accepted(NULL);
    metrics_commit_observed(NULL, 1.0);
    char *text = exposition(m, NULL);
    assert_true(sample(text, "mitilog_associations_accepted_total") == 2);
    assert_true(sample(text, "mitilog_associations_refused_total{reason=\"called_ae_title\"}") ==
                1);
    assert_true(sample(text, "mitilog_objects_received_total{status=\"0000\"}") == 1);
    assert_true(sample(text, "mitilog_objects_received_total{status=\"C000\"}") == 2);
    assert_true(sample(text, "mitilog_objects_received_total{status=\"A900\"}") == 0);
    assert_true(sample(text, "mitilog_objects_received_total{status=\"other\"}") == -1);
    assert_true(sample(text, "mitilog_received_bytes_total") == 1024);
    assert_true(sample(text, "mitilog_queue_items{queue=\"pixel_reading\"}") == 7);
    assert_true(sample(text, "mitilog_pixel_objects_refused_total{reason=\"no_profile\"}") == 1);
    assert_true(sample(text, "mitilog_build_info{version=\"9.9.9\",site=\"north-wing\"}") == 1);
    /* no object yet: no timestamp sample rather than a false 0 */
    assert_null(strstr(text, "mitilog_last_object_received_timestamp_seconds"));
    free(text);

    metrics_object_received(m, 1700000000.25);
    metrics_object_received(m, 1600000000.0); /* older, reported late: kept out */
    text = exposition(m, NULL);
    assert_true(sample(text, "mitilog_last_object_received_timestamp_seconds") == 1700000000.25);
    free(text);
    metrics_free(m);
}

/* promtool check metrics reads the text on standard input; exit 0 and
 * no output means it parsed and passed its lint (naming, units, _total). */
static void promtool_accepts_the_text(void **state)
{
    (void)state;
    if (access("/usr/bin/promtool", X_OK) != 0)
        skip();
    metrics *m = NULL;
    assert_int_equal(metrics_create(&m, NULL), MITILOG_OK);
    metrics_commit_observed(m, 0.02);
    metrics_object_received(m, 1700000000.0);
    metrics_object_answered(m, 0x1234); /* "other" */
    metrics_finding_count rows[2] = {{"mi \"over\" \\limit\nx", "violation", 3},
                                     {"dwell", "advisory", 1}};
    metrics_database database = {1, 1, 123456, rows, 2};
    char *text = exposition(m, &database);
    assert_non_null(strstr(text, "mitilog_findings{rule=\"mi \\\"over\\\" \\\\limit\\nx\","
                                 "severity=\"violation\"} 3\n"));
    char path[] = "/tmp/mitilog-metrics-XXXXXX";
    int descriptor = mkstemp(path);
    assert_true(descriptor >= 0);
    assert_int_equal(write(descriptor, text, strlen(text)), (ssize_t)strlen(text));
    close(descriptor);
    char command[256];
    snprintf(command, sizeof command, "/usr/bin/promtool check metrics < %s 2>&1", path);
    FILE *pipe = popen(command, "r");
    assert_non_null(pipe);
    char output[4096] = "";
    size_t got = fread(output, 1, sizeof output - 1, pipe);
    output[got] = '\0';
    int status = pclose(pipe);
    unlink(path);
    if (status != 0 || got != 0)
        fail_msg("promtool check metrics (status %d):\n%s\n---\n%s", status, output, text);
    free(text);
    metrics_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(label_values_escape_the_three_characters),
        cmocka_unit_test(histogram_buckets_are_cumulative),
        cmocka_unit_test(counters_and_labels),
        cmocka_unit_test(promtool_accepts_the_text),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
