/* Runs every numbered case in tests/rules/cases/ (README.md there): an
 * exam and its captures, evaluated under the shipped conf/policy.ini, and
 * the findings the physicist expects. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>
#include <dirent.h>
#include <ini.h>
#include <math.h>

#include "rules_test_support.h"

enum { MAX_CAPTURES = 64, MAX_EXPECT = 64, TEXT = 128 };

typedef struct test_case {
    rules_exam exam;
    exam_capture captures[MAX_CAPTURES];
    char uids[MAX_CAPTURES][TEXT];
    char study[TEXT], category[TEXT], room[TEXT], transducer[TEXT];
    char expect_keys[MAX_EXPECT][TEXT], expect_values[MAX_EXPECT][TEXT];
    size_t expect_count;
    double tolerance;
    char problem[256];
} test_case;

static int parse_number(const char *text, double *value)
{
    char *end = NULL;
    *value = strtod(text, &end);
    return text[0] != '\0' && *end == '\0' ? 0 : -1;
}

/* "13+6" weeks+days, or decimal weeks. */
static int parse_weeks(const char *text, double *weeks)
{
    int whole, days;
    char tail;
    if (sscanf(text, "%d+%d%c", &whole, &days, &tail) == 2) {
        *weeks = whole + days / 7.0;
        return 0;
    }
    return parse_number(text, weeks);
}

/* "HH:MM:SS" or seconds. */
static int parse_time(const char *text, double *seconds)
{
    int h, m;
    double s;
    if (sscanf(text, "%d:%d:%lf", &h, &m, &s) == 3) {
        *seconds = h * 3600.0 + m * 60.0 + s;
        return 0;
    }
    return parse_number(text, seconds);
}

/* "2D+PW", "CW", "colour", "power", "M", "3D" or "0x0009". */
static int parse_modes(const char *text, unsigned *modes)
{
    static const struct {
        const char *name;
        unsigned bit;
    } names[] = {{"2D", EXAM_MODE_BIT(EXAM_MODE_2D)},
                 {"M", EXAM_MODE_BIT(EXAM_MODE_M)},
                 {"CW", EXAM_MODE_BIT(EXAM_MODE_CW)},
                 {"PW", EXAM_MODE_BIT(EXAM_MODE_PW)},
                 {"colour", EXAM_MODE_BIT(EXAM_MODE_COLOUR)},
                 {"colour_m", EXAM_MODE_BIT(EXAM_MODE_COLOUR_M)},
                 {"3D", EXAM_MODE_BIT(EXAM_MODE_3D)},
                 {"power", EXAM_MODE_BIT(EXAM_MODE_POWER)}};
    if (strncmp(text, "0x", 2) == 0) {
        *modes = (unsigned)strtoul(text, NULL, 16);
        return 0;
    }
    char copy[TEXT];
    snprintf(copy, sizeof copy, "%s", text);
    *modes = 0;
    char *saveptr = NULL;
    for (char *item = strtok_r(copy, "+ ", &saveptr); item; item = strtok_r(NULL, "+ ", &saveptr)) {
        size_t i = 0;
        while (i < sizeof names / sizeof names[0] && strcmp(names[i].name, item) != 0)
            i++;
        if (i == sizeof names / sizeof names[0])
            return -1;
        *modes |= names[i].bit;
    }
    return 0;
}

static int index_of_name(const char *name)
{
    for (int x = 0; x < EXAM_INDEX_COUNT; x++) {
        if (strcmp(exam_index_name((exam_index)x), name) == 0)
            return x;
    }
    return -1;
}

static int exam_key(test_case *c, const char *key, const char *value)
{
    rules_exam *exam = &c->exam;
    int failed = 0;
    if (strcmp(key, "study") == 0) {
        snprintf(c->study, sizeof c->study, "%s", value);
    } else if (strcmp(key, "category") == 0) {
        snprintf(c->category, sizeof c->category, "%s", value);
        exam->category = c->category;
    } else if (strcmp(key, "group") == 0) {
        failed = exam_group_parse(value, &exam->group);
    } else if (strcmp(key, "age") == 0) {
        failed = rules_age_parse(value, &exam->age);
    } else if (strcmp(key, "gestational_age") == 0) {
        exam->gestational_age_known = strcmp(value, "unknown") != 0;
        if (exam->gestational_age_known)
            failed = parse_weeks(value, &exam->gestational_age_weeks);
    } else if (strcmp(key, "governing_index") == 0) {
        int x = index_of_name(value);
        exam->has_governing_index = x >= 0;
        exam->governing_index = (exam_index)(x >= 0 ? x : 0);
        failed = x < 0;
    } else if (strcmp(key, "room") == 0) {
        snprintf(c->room, sizeof c->room, "%s", value);
    } else if (strcmp(key, "transducer") == 0) {
        snprintf(c->transducer, sizeof c->transducer, "%s", value);
    } else if (strcmp(key, "closed") == 0) {
        exam->closed = strcmp(value, "yes") == 0;
    } else if (strcmp(key, "sr_scan_time_seconds") == 0) {
        failed = parse_number(value, &exam->sr_scan_time_seconds);
    } else {
        failed = 1;
    }
    return failed;
}

static int capture_key(test_case *c, exam_capture *capture, size_t n, const char *key,
                       const char *value)
{
    int x = index_of_name(key);
    if (x >= 0) {
        if (strcmp(value, "missing") == 0)
            capture->indices[x].status = EXAM_VALUE_MISSING;
        else if (parse_number(value, &capture->indices[x].value) == 0)
            capture->indices[x].status = EXAM_VALUE_OK;
        else
            return 1;
        return 0;
    }
    if (strcmp(key, "uid") == 0) {
        snprintf(c->uids[n], sizeof c->uids[n], "%s", value);
        return 0;
    }
    if (strcmp(key, "time") == 0) {
        capture->has_time = strcmp(value, "none") != 0;
        return capture->has_time ? parse_time(value, &capture->time_seconds) : 0;
    }
    if (strcmp(key, "cine_seconds") == 0)
        return parse_number(value, &capture->cine_seconds);
    if (strcmp(key, "modes") == 0)
        return parse_modes(value, &capture->modes);
    return 1;
}

static int handle(void *user, const char *section, const char *key, const char *value)
{
    test_case *c = user;
    int failed = 0;
    unsigned n = 0;
    if (strcmp(section, "exam") == 0) {
        failed = exam_key(c, key, value);
    } else if (sscanf(section, "capture %u", &n) == 1 && n >= 1 && n <= MAX_CAPTURES) {
        if (n > c->exam.capture_count) {
            for (size_t i = c->exam.capture_count; i < n; i++)
                c->captures[i].modes = EXAM_MODE_BIT(EXAM_MODE_2D);
            c->exam.capture_count = n;
        }
        failed = capture_key(c, &c->captures[n - 1], n - 1, key, value);
    } else if (strcmp(section, "expect") == 0 && strcmp(key, "tolerance") == 0) {
        failed = parse_number(value, &c->tolerance);
    } else if (strcmp(section, "expect") == 0 && c->expect_count < MAX_EXPECT) {
        snprintf(c->expect_keys[c->expect_count], TEXT, "%s", key);
        snprintf(c->expect_values[c->expect_count], TEXT, "%s", value);
        c->expect_count++;
    } else if (strcmp(section, "case") != 0) {
        failed = 1;
    }
    if (failed && c->problem[0] == '\0')
        snprintf(c->problem, sizeof c->problem, "[%s] %s = %s: not understood", section, key,
                 value);
    return 1;
}

/* "ID" or "ID@threshold" -> the first matching finding. */
static const exam_finding *finding_for(const rules_result *result, const char *what)
{
    char id[TEXT];
    snprintf(id, sizeof id, "%s", what);
    double threshold = -1;
    char *at = strchr(id, '@');
    if (at != NULL) {
        *at = '\0';
        threshold = atof(at + 1);
    }
    for (size_t i = 0; i < result->finding_count; i++) {
        const exam_finding *finding = &result->findings[i];
        if (strcmp(finding->rule_id, id) == 0 &&
            (threshold < 0 || fabs(finding->threshold - threshold) < 1e-9))
            return finding;
    }
    return NULL;
}

static void check_expectation(const char *name, const test_case *c, const rules_result *result,
                              const char *key, const char *value)
{
    double number = 0;
    int numeric = parse_number(value, &number) == 0;
    const char *dot = strchr(key, '.');
    const char *what = dot ? dot + 1 : "";
    size_t kind = dot ? (size_t)(dot - key) : strlen(key);
    const exam_finding *finding = dot ? finding_for(result, what) : NULL;
    double actual = 0;
    const char *actual_text = NULL;
    if (strcmp(key, "findings") == 0) {
        actual = (double)result->finding_count;
    } else if (kind == 4 && strncmp(key, "rule", 4) == 0) {
        char id[TEXT];
        snprintf(id, sizeof id, "%s", what);
        char *at = strchr(id, '@');
        double threshold = at ? (*at = '\0', atof(at + 1)) : -1;
        actual = (double)support_count(result, id, threshold);
    } else if (strcmp(key, "governing_index") == 0) {
        actual_text = exam_index_name(result->measurements.governing_index);
    } else if (strcmp(key, "cem43") == 0) {
        actual = result->measurements.cem43_minutes;
    } else if (strcmp(key, "estimated_seconds") == 0) {
        actual = result->measurements.estimated_seconds;
    } else if (strcmp(key, "doppler_seconds") == 0) {
        actual = result->measurements.doppler_seconds;
    } else if (dot != NULL && finding == NULL) {
        fail_msg("%s: %s: no finding %s", name, key, what);
    } else if (kind == 5 && strncmp(key, "value", 5) == 0) {
        actual = finding->measured;
    } else if (kind == 5 && strncmp(key, "limit", 5) == 0) {
        actual = finding->limit;
    } else if (kind == 8 && strncmp(key, "severity", 8) == 0) {
        actual_text = exam_severity_name(finding->severity);
    } else if (kind == 5 && strncmp(key, "index", 5) == 0) {
        actual_text = finding->has_index ? exam_index_name(finding->index) : "none";
    } else if (kind == 9 && strncmp(key, "instances", 9) == 0) {
        actual = (double)finding->instance_count;
    } else if (kind == 11 && strncmp(key, "provisional", 11) == 0) {
        actual_text = finding->provisional ? "yes" : "no";
    } else if (kind == 7 && strncmp(key, "seconds", 7) == 0) {
        actual = finding->estimated_seconds;
    } else {
        fail_msg("%s: [expect] %s: unknown expectation", name, key);
    }
    if (actual_text != NULL) {
        if (strcmp(actual_text, value) != 0)
            fail_msg("%s: %s: expected %s, got %s", name, key, value, actual_text);
        return;
    }
    if (!numeric)
        fail_msg("%s: %s: '%s' is not a number", name, key, value);
    if (fabs(actual - number) > c->tolerance)
        fail_msg("%s: %s: expected %.6f, got %.6f", name, key, number, actual);
}

static int is_case_file(const struct dirent *entry)
{
    size_t length = strlen(entry->d_name);
    return length > 8 && entry->d_name[0] >= '0' && entry->d_name[0] <= '9' &&
           strcmp(entry->d_name + length - 4, ".ini") == 0;
}

static void every_case_file(void **state)
{
    rules_policy *policy = *state;
    char folder[4096];
    snprintf(folder, sizeof folder, "%s/tests/rules/cases", support_source_dir());
    struct dirent **entries = NULL;
    int count = scandir(folder, &entries, is_case_file, alphasort);
    assert_true(count >= 12);
    for (int i = 0; i < count; i++) {
        char path[8192];
        snprintf(path, sizeof path, "%s/%s", folder, entries[i]->d_name);
        test_case *c = calloc(1, sizeof *c);
        assert_non_null(c);
        c->tolerance = 1e-6;
        c->exam.closed = 1;
        c->exam.age = RULES_AGE_ADULT;
        int rc = ini_parse(path, handle, c);
        if (rc != 0 || c->problem[0])
            fail_msg("%s: line %d %s", entries[i]->d_name, rc, c->problem);
        for (size_t n = 0; n < c->exam.capture_count; n++)
            c->captures[n].sop_instance_uid = c->uids[n];
        c->exam.captures = c->captures;
        c->exam.study_instance_uid = c->study;
        c->exam.room = c->room;
        c->exam.transducer = c->transducer;
        rules_result result;
        mitilog_error error;
        assert_int_equal(rules_evaluate(policy, &c->exam, &result, &error), MITILOG_OK);
        for (size_t e = 0; e < c->expect_count; e++)
            check_expectation(entries[i]->d_name, c, &result, c->expect_keys[e],
                              c->expect_values[e]);
        print_message("case %s: %zu finding(s) as expected\n", entries[i]->d_name,
                      result.finding_count);
        rules_result_free(&result);
        free(c);
        free(entries[i]);
    }
    free(entries);
}

static int setup(void **state)
{
    *state = support_shipped_policy();
    return *state ? 0 : -1;
}

static int teardown(void **state)
{
    rules_policy_free(*state);
    return 0;
}

int main(void)
{
    const struct CMUnitTest tests[] = {cmocka_unit_test(every_case_file)};
    return cmocka_run_group_tests(tests, setup, teardown);
}
