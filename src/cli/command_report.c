/* mitilog report week|stats ...: the weekly outlier list and the exposure
 * statistics for a period as files (HTML printable, CSV, JSON), from the
 * database the configuration names (src/report/). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "report/report.h"
#include "store/store.h"
#include "util/log.h"

static void print_report_usage(FILE *out)
{
    fprintf(
        out,
        "usage: mitilog report week [YYYY-Www] [--group room|preset|shift|transducer|exam_type]\n"
        "                      [--baseline-weeks N] [--minimum N] [--all-exams]\n"
        "                      [--format html|csv|json] [--output FILE] [--config FILE]\n"
        "       mitilog report stats [--from YYYY-MM-DD] [--to YYYY-MM-DD]\n"
        "                      [--by exam_type|room|preset|shift|transducer]\n"
        "                      [--format csv|json|html] [--output FILE] [--config FILE]\n"
        "\n"
        "week: the weekly outlier list of an ISO week (default: the latest week held),\n"
        "against a trailing baseline per exam type (default 12 weeks, 20 exams).\n"
        "stats: count, median, P75, P95 of each exam's governing index and MI, share of\n"
        "exams with findings and estimated time above thresholds, per exam type; as html a\n"
        "printable document with charts, the [site] institution and a sign-off block.\n"
        "Both state the period, policy version, data completeness and the caution.\n"
        "Default format: html for week, csv for stats. Exit status: 0 written, 1 failed,\n"
        "2 usage.\n");
}

/* A decimal integer in [minimum, maximum]. */
static int report_parse_count(const char *text, long minimum, long maximum, long *value)
{
    char *end = NULL;
    long parsed = strtol(text, &end, 10);
    if (end == text || *end != '\0' || parsed < minimum || parsed > maximum)
        return 0;
    *value = parsed;
    return 1;
}

int command_report(int argc, char **argv)
{
    if (argc < 2 || cli_wants_help(argc, argv)) {
        print_report_usage(argc < 2 ? stderr : stdout);
        return argc < 2 ? EXIT_STATUS_USAGE : EXIT_STATUS_SUCCESS;
    }
    int is_week = strcmp(argv[1], "week") == 0;
    if (!is_week && strcmp(argv[1], "stats") != 0) {
        print_report_usage(stderr);
        return EXIT_STATUS_USAGE;
    }
    const char *config_path = NULL, *output = NULL;
    report_format format = is_week ? REPORT_HTML : REPORT_CSV;
    report_week_request week = report_week_default_request();
    report_stats_request stats = {NULL, NULL, STATS_BY_EXAM_TYPE, NULL};
    long value = 0;
    for (int i = 2; i < argc; i++) {
        const char *option = argv[i];
        const char *next = i + 1 < argc ? argv[i + 1] : NULL;
        int bad = 0;
        if (strcmp(option, "--config") == 0 && next != NULL) {
            config_path = next;
            i++;
        } else if (strcmp(option, "--output") == 0 && next != NULL) {
            output = next;
            i++;
        } else if (strcmp(option, "--format") == 0 && next != NULL) {
            bad = report_format_parse(next, &format) != 0;
            i++;
        } else if (is_week && strcmp(option, "--group") == 0 && next != NULL) {
            bad = stats_dimension_parse(next, &week.group) != 0;
            i++;
        } else if (is_week && strcmp(option, "--baseline-weeks") == 0 && next != NULL) {
            bad = !report_parse_count(next, 1, 104, &value);
            week.settings.baseline_weeks = (size_t)value;
            i++;
        } else if (is_week && strcmp(option, "--minimum") == 0 && next != NULL) {
            bad = !report_parse_count(next, 1, 100000, &value);
            week.settings.minimum_baseline = (size_t)value;
            i++;
        } else if (is_week && strcmp(option, "--all-exams") == 0) {
            week.all_exams = 1;
        } else if (is_week && option[0] != '-' && !week.has_week) {
            bad = stats_iso_week_parse(option, &week.iso_year, &week.iso_week) != MITILOG_OK;
            week.has_week = 1;
        } else if (!is_week && strcmp(option, "--from") == 0 && next != NULL) {
            stats.from = next;
            i++;
        } else if (!is_week && strcmp(option, "--to") == 0 && next != NULL) {
            stats.to = next;
            i++;
        } else if (!is_week && strcmp(option, "--by") == 0 && next != NULL) {
            bad = stats_dimension_parse(next, &stats.by) != 0;
            i++;
        } else {
            bad = 1;
        }
        if (bad) {
            fprintf(stderr, "mitilog report: bad argument '%s'%s%s\n\n", option,
                    next != NULL && option[0] == '-' ? " " : "",
                    next != NULL && option[0] == '-' ? next : "");
            print_report_usage(stderr);
            return EXIT_STATUS_USAGE;
        }
    }
    config config;
    if (cli_load_config(config_path, &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    if (cli_require_database("report", &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_FAILURE;
    }
    mitilog_error error;
    store *store = NULL;
    char *document = NULL;
    int status = EXIT_STATUS_FAILURE;
    mitilog_status result = cli_open_store(&config, &store, &error);
    if (config.site_institution != NULL && config.site_institution[0] != '\0')
        stats.institution = config.site_institution;
    if (result == MITILOG_OK)
        result = is_week ? report_week(store, &week, format, &document, &error)
                         : report_stats(store, &stats, format, &document, &error);
    if (result != MITILOG_OK) {
        log_error("report: %s", error.text);
        status = result == MITILOG_ERROR_INVALID ? EXIT_STATUS_USAGE : EXIT_STATUS_FAILURE;
        goto done;
    }
    FILE *out = output != NULL ? fopen(output, "wb") : stdout;
    if (out == NULL) {
        log_error("report: cannot write %s", output);
        goto done;
    }
    size_t length = strlen(document);
    int failed = fwrite(document, 1, length, out) != length;
    if (format == REPORT_JSON)
        failed |= fputc('\n', out) == EOF;
    failed |= fflush(out) != 0;
    if (output != NULL)
        failed |= fclose(out) != 0;
    if (failed)
        log_error("report: writing %s failed", output != NULL ? output : "standard output");
    else
        status = EXIT_STATUS_SUCCESS;
done:
    free(document);
    store_close(store);
    config_free(&config);
    return status;
}
