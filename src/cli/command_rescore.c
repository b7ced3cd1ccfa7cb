/* mitilog rescore [--config FILE] [--from YYYY-MM-DD] [--to YYYY-MM-DD]
 * [--read-pixels]: with --read-pixels, first reads again the indices drawn
 * in the pixels of the stored captures whose object is still at hand
 * (ingest_read_stored); then re-evaluates the stored exams (by first acquisition date) and the days
 * of rule output_not_reported in the period under the current policy
 * ([rules] policy). Findings of earlier policy versions are kept and
 * marked superseded; an evaluation that would write what is stored
 * writes nothing, so running it twice changes nothing. */
#include <stdio.h>
#include <string.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "config/config_site.h"
#include "dicom/dcm.h"
#include "ingest/ingest.h"
#include "rules/rules.h"
#include "stats/stats_calendar.h"
#include "store/store.h"
#include "store/store_findings.h"
#include "store/store_exams.h"
#include "util/log.h"

/* A real calendar date, exactly YYYY-MM-DD (2026-02-30 is not one). */
static int rescore_is_date(const char *text, long *day)
{
    return strlen(text) == 10 && stats_day_number(text, day) == MITILOG_OK;
}

static void print_rescore_usage(FILE *out)
{
    fprintf(out, "usage: mitilog rescore [--config FILE] [--from YYYY-MM-DD] [--to YYYY-MM-DD]\n"
                 "                       [--read-pixels]\n"
                 "--read-pixels first reads again the indices drawn in the pixels of the\n"
                 "ultrasound images and cines of the period whose object is still at hand\n"
                 "(retention full, or an imported file still where it was imported from)\n"
                 "and whose device has an active screen profile (docs/reading.md).\n"
                 "Re-evaluates the stored exams whose first acquisition falls in the period\n"
                 "(inclusive; open when not given) under the current policy ([rules] policy),\n"
                 "and rule output_not_reported for each day of the period. Findings of other\n"
                 "policy versions are kept, marked superseded. Idempotent. Prints one line:\n"
                 "exams evaluated, findings written, findings superseded.\n");
}

int command_rescore(int argc, char **argv)
{
    const char *config_path = NULL, *from = NULL, *to = NULL;
    long from_day = 0, to_day = 0;
    int read_pixels = 0;
    if (cli_wants_help(argc, argv)) {
        print_rescore_usage(stdout);
        return EXIT_STATUS_SUCCESS;
    }
    for (int i = 1; i < argc; i++) {
        const char *option = argv[i];
        int is_from = strcmp(option, "--from") == 0, is_to = strcmp(option, "--to") == 0;
        if ((is_from || is_to || strcmp(option, "--config") == 0) && i + 1 >= argc) {
            fprintf(stderr, "mitilog rescore: %s needs a value\n\n", option);
        } else if (strcmp(option, "--config") == 0) {
            config_path = argv[++i];
            continue;
        } else if (strcmp(option, "--read-pixels") == 0) {
            read_pixels = 1;
            continue;
        } else if (is_from || is_to) {
            const char *value = argv[++i];
            if (rescore_is_date(value, is_from ? &from_day : &to_day)) {
                *(is_from ? &from : &to) = value;
                continue;
            }
            fprintf(stderr,
                    "mitilog rescore: %s '%s' is not a calendar date; write it as YYYY-MM-DD,\n"
                    "e.g. 2026-11-02\n\n",
                    option, value);
        } else {
            fprintf(stderr, "mitilog rescore: unknown argument '%s'\n\n", option);
        }
        print_rescore_usage(stderr);
        return EXIT_STATUS_USAGE;
    }
    if (from != NULL && to != NULL && from_day > to_day) {
        fprintf(stderr, "mitilog rescore: --from %s is after --to %s; swap them\n", from, to);
        return EXIT_STATUS_USAGE;
    }
    config config;
    if (cli_load_config(config_path, &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    if (cli_require_database("rescore", &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_FAILURE;
    }
    int exit_status = EXIT_STATUS_SUCCESS;
    mitilog_error error;
    rules_policy *policy = NULL;
    ext_site_rules rules;
    int have_rules = 0;
    store *st = NULL;
    char **items = NULL;
    size_t count = 0;
    store_evaluation_counts exams = {0}, days = {0};
    if (rules_policy_load(config.rules_policy_path, &policy, &error) == MITILOG_OK) {
        have_rules = 1; /* config_site_load initialises rules even on failure */
        if (config_site_load(config.site_rules_path, &rules, &error) == MITILOG_OK)
            have_rules = 2;
    }
    if (have_rules != 2) {
        fprintf(stderr, "mitilog: %s\n", error.text);
        exit_status = EXIT_STATUS_USAGE;
        goto done;
    }
    if (cli_open_store(&config, &st, &error) != MITILOG_OK ||
        store_set_site(st, config.receiver_site, &error) != MITILOG_OK)
        goto failed;
    if (read_pixels) {
        ingest *pipeline = NULL;
        ingest_backfill_counts read = {0};
        if (dcm_initialise(LOG_LEVEL_WARNING, &error) != MITILOG_OK ||
            cli_prepare_data_directory(&config, &error) != 0 ||
            ingest_create(&config, st, NULL, &pipeline, &error) != MITILOG_OK)
            goto failed;
        mitilog_status read_status = ingest_read_stored(pipeline, from, to, &read, &error);
        ingest_free(pipeline);
        if (read_status != MITILOG_OK)
            goto failed;
        printf("rescore: pixels: %lu captures read again, %lu not kept (retention), "
               "%lu without an active screen profile, %lu left for a later run (queue full)\n",
               read.queued, read.not_kept, read.no_profile, read.queue_full);
    }
    if (ingest_register_policy(st, policy, &error) != MITILOG_OK ||
        store_exams_in_period(st, from, to, &items, &count, &error) != MITILOG_OK)
        goto failed;
    double now = ingest_clock_now();
    for (size_t i = 0; i < count; i++)
        if (ingest_evaluate_study(st, &rules, policy, items[i], now, &exams, &error) != MITILOG_OK)
            goto failed;
    store_texts_free(items, count);
    items = NULL;
    count = 0;
    if (store_days_in_period(st, from, to, &items, &count, &error) != MITILOG_OK)
        goto failed;
    for (size_t i = 0; i < count; i++)
        if (ingest_evaluate_day(st, policy, items[i], &days, &error) != MITILOG_OK)
            goto failed;
    printf("rescore: policy %s; %lu exams evaluated (%lu unchanged), %lu days; "
           "%lu findings written, %lu findings superseded\n",
           rules_policy_version(policy), exams.evaluations, exams.unchanged, days.evaluations,
           exams.written + days.written, exams.superseded + days.superseded);
    goto done;
failed:
    fprintf(stderr, "mitilog: rescore: %s\n", error.text);
    exit_status = EXIT_STATUS_FAILURE;
done:
    store_texts_free(items, count);
    store_close(st);
    if (have_rules > 0)
        ext_site_rules_free(&rules);
    rules_policy_free(policy);
    config_free(&config);
    return exit_status;
}
