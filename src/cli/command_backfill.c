/* mitilog backfill --from AE@HOST:PORT --since DATE --until DATE ...:
 * past ultrasound studies from the PACS through the ingest pipeline
 * (src/backfill/backfill.h, docs/backfill.md). */
#include <errno.h>
#include <fcntl.h>
#include <pthread.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <unistd.h>

#include "backfill/backfill.h"
#include "cli/cli_options.h"
#include "cli/commands.h"
#include "dicom/dcm.h"
#include "ingest/ingest.h"
#include "store/store.h"
#include "store/store_backfill.h"
#include "util/log.h"

static void print_backfill_usage(FILE *out)
{
    fprintf(out,
            "usage: mitilog backfill [--config FILE] --since DATE --until DATE\n"
            "                        [--from AE@HOST:PORT] [--station NAME]\n"
            "                        [--description TEXT] [--retrieve get|move]\n"
            "                        [--move-destination AE] [--move-listen-port PORT]\n"
            "                        [--rate N/min] [--concurrency N]\n"
            "                        [--window HH:MM-HH:MM] [--progress-seconds N]\n"
            "Fetches the ultrasound studies of a date range from the PACS (C-FIND, then\n"
            "C-GET or C-MOVE) and stores every object as if it had been received. What\n"
            "is done is recorded: the same command run again skips finished studies and\n"
            "resumes an interrupted one without fetching an object twice. Defaults come\n"
            "from the [backfill] section of the configuration (docs/backfill.md).\n"
            "  --from AE@HOST:PORT    the PACS ([backfill] source)\n"
            "  --since, --until DATE  study dates, YYYY-MM-DD, both included\n"
            "  --station NAME         only objects of this Station Name (* ? wildcards)\n"
            "  --description TEXT     only studies of this Study Description (* ?)\n"
            "  --retrieve get|move    C-GET (default) or C-MOVE to --move-destination\n"
            "  --move-listen-port N   C-MOVE: receive here instead of the daemon\n"
            "  --rate N/min           objects per minute at most (0: no limit)\n"
            "  --concurrency N        studies at once, 1-%d (default 1)\n"
            "  --window HH:MM-HH:MM   run only then (local time); waits outside it\n"
            "  --progress-seconds N   seconds between progress lines\n"
            "Exit status: 0 every study done, 1 a study failed or the PACS could not be\n"
            "queried (the next run retries), 2 usage or configuration error.\n",
            BACKFILL_CONCURRENCY_MAX);
}

/* SIGINT or SIGTERM: the run is recorded as interrupted and the process
 * ends at once. Every object answered has committed and every study
 * marked done has its exam rebuilt; the study in progress resumes with
 * the next run, like after a kill. */
typedef struct backfill_stopper {
    sigset_t signals;
    store *store;
} backfill_stopper;

static void *backfill_stop_thread(void *argument)
{
    backfill_stopper *stopper = argument;
    int received = 0;
    if (sigwait(&stopper->signals, &received) != 0 || received == SIGUSR1)
        return NULL; /* SIGUSR1: the command's own end (no cancellation:
                        a cancelled thread's unwinding upset ASan) */
    static const char message[] = "interrupted; the same command resumes where it stopped";
    mitilog_error error;
    if (store_backfill_run_interrupt(stopper->store, message, &error) != MITILOG_OK)
        log_warning("backfill: the stop was not recorded: %s", error.text);
    fprintf(stderr, "mitilog backfill: %s (%s)\n", message, strsignal(received));
    fflush(stdout);
    _exit(EXIT_STATUS_FAILURE);
}

/* One backfill per database at a time: two would fetch the same studies.
 * On SQLite a lock file beside the database file (DATABASE-backfill.lock),
 * so that two configurations naming the same file share it; PostgreSQL's
 * lock is the database's own (store_backfill_lock). The
 * lock goes with the process, also when it is killed. Returns the
 * descriptor holding it, or -1 (said on stderr). */
static int backfill_lock(const char *database_path)
{
    char path[4096];
    snprintf(path, sizeof path, "%s-backfill.lock", database_path);
    int fd = open(path, O_RDWR | O_CREAT | O_CLOEXEC, 0640);
    if (fd < 0) {
        fprintf(stderr, "mitilog backfill: cannot open %s: %s\n", path, strerror(errno));
        return -1;
    }
    if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
        fprintf(stderr,
                "mitilog backfill: another backfill is running on this database (it holds %s); "
                "wait for it to end, or stop it first\n",
                path);
        close(fd);
        return -1;
    }
    return fd;
}

/* "N", "N/min" into *value. */
static int parse_rate(const char *text, unsigned *value)
{
    char *end = NULL;
    unsigned long number = strtoul(text, &end, 10);
    if (end == text || text[0] == '-' || number > 1000000)
        return -1;
    if (*end != '\0' && strcmp(end, "/min") != 0)
        return -1;
    *value = (unsigned)number;
    return 0;
}

static int parse_unsigned(const char *text, unsigned minimum, unsigned maximum, unsigned *value)
{
    char *end = NULL;
    unsigned long number = strtoul(text, &end, 10);
    if (end == text || *end != '\0' || text[0] == '-' || number < minimum || number > maximum)
        return -1;
    *value = (unsigned)number;
    return 0;
}

int command_backfill(int argc, char **argv)
{
    const char *config_path = NULL, *from = NULL, *since = NULL, *until = NULL;
    const char *station = NULL, *description = NULL, *retrieve = NULL, *window = NULL;
    const char *destination = NULL, *rate = NULL, *listen = NULL, *concurrency = NULL;
    const char *progress = NULL;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        const char **target = NULL;
        if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
            print_backfill_usage(stdout);
            return EXIT_STATUS_SUCCESS;
        }
        if (strcmp(a, "--config") == 0)
            target = &config_path;
        else if (strcmp(a, "--from") == 0)
            target = &from;
        else if (strcmp(a, "--since") == 0)
            target = &since;
        else if (strcmp(a, "--until") == 0)
            target = &until;
        else if (strcmp(a, "--station") == 0)
            target = &station;
        else if (strcmp(a, "--description") == 0)
            target = &description;
        else if (strcmp(a, "--retrieve") == 0)
            target = &retrieve;
        else if (strcmp(a, "--move-destination") == 0)
            target = &destination;
        else if (strcmp(a, "--move-listen-port") == 0)
            target = &listen;
        else if (strcmp(a, "--rate") == 0)
            target = &rate;
        else if (strcmp(a, "--concurrency") == 0)
            target = &concurrency;
        else if (strcmp(a, "--window") == 0)
            target = &window;
        else if (strcmp(a, "--progress-seconds") == 0)
            target = &progress;
        if (target == NULL || i + 1 >= argc) {
            fprintf(stderr, "mitilog backfill: %s '%s'\n\n",
                    target == NULL ? "unknown option" : "missing value after", a);
            print_backfill_usage(stderr);
            return EXIT_STATUS_USAGE;
        }
        *target = argv[++i];
    }
    config config;
    if (cli_load_config(config_path, &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    backfill_settings settings;
    memset(&settings, 0, sizeof settings);
    mitilog_error error;
    int status = EXIT_STATUS_USAGE;
    store *store = NULL;
    ingest *pipeline = NULL;
    backfill_stopper stopper;
    pthread_t stop_thread;
    int stop_started = 0;
    int lock = -1;
    int held = -1; /* the database's backfill lock (store_backfill_lock) */
    const char *source = from != NULL ? from : config.backfill_source;
    if (source[0] == '\0') {
        fprintf(stderr, "mitilog backfill: no PACS given: add --from AE@HOST:PORT (or [backfill] "
                        "source in the configuration)\n");
        goto done;
    }
    if (since == NULL || until == NULL) {
        fprintf(stderr, "mitilog backfill: give the study dates with --since YYYY-MM-DD and "
                        "--until YYYY-MM-DD\n");
        goto done;
    }
    retrieve = retrieve != NULL ? retrieve : config.backfill_retrieve;
    if (backfill_parse_source(source, &settings, &error) != MITILOG_OK ||
        backfill_parse_date(since, settings.date_from, &error) != MITILOG_OK ||
        backfill_parse_date(until, settings.date_to, &error) != MITILOG_OK ||
        backfill_parse_window(window != NULL ? window : config.backfill_window, &settings,
                              &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog backfill: %s\n", error.text);
        goto done;
    }
    if (strcmp(settings.date_from, settings.date_to) > 0) {
        fprintf(stderr, "mitilog backfill: --since %s is after --until %s\n", since, until);
        goto done;
    }
    if (strcmp(retrieve, "get") != 0 && strcmp(retrieve, "move") != 0) {
        fprintf(stderr, "mitilog backfill: --retrieve is get or move, not '%s'\n", retrieve);
        goto done;
    }
    settings.method = strcmp(retrieve, "move") == 0 ? DCM_RETRIEVE_MOVE : DCM_RETRIEVE_GET;
    settings.calling_ae_title = config.backfill_calling_ae_title[0] != '\0'
                                    ? config.backfill_calling_ae_title
                                    : config.ae_title;
    settings.move_destination = destination != NULL ? destination
                                : config.backfill_move_destination[0] != '\0'
                                    ? config.backfill_move_destination
                                    : config.ae_title;
    settings.move_listen_port = config.backfill_move_listen_port;
    settings.rate_per_minute = config.backfill_rate_per_minute;
    settings.concurrency = config.backfill_concurrency;
    settings.progress_seconds = config.backfill_progress_seconds;
    if ((listen != NULL && parse_unsigned(listen, 1, 65535, &settings.move_listen_port) != 0) ||
        (rate != NULL && parse_rate(rate, &settings.rate_per_minute) != 0) ||
        (concurrency != NULL &&
         parse_unsigned(concurrency, 1, BACKFILL_CONCURRENCY_MAX, &settings.concurrency) != 0) ||
        (progress != NULL && parse_unsigned(progress, 1, 3600, &settings.progress_seconds) != 0)) {
        fprintf(stderr,
                "mitilog backfill: --move-listen-port is 1-65535, --rate N/min (N up to "
                "1000000, 0 no limit), --concurrency 1-%d, --progress-seconds 1-3600\n",
                BACKFILL_CONCURRENCY_MAX);
        goto done;
    }
    settings.station = station != NULL ? station : config.backfill_station;
    settings.description = description != NULL ? description : config.backfill_description;
    if (settings.method == DCM_RETRIEVE_MOVE && settings.move_listen_port == 0 &&
        settings.station[0] != '\0') {
        fprintf(stderr,
                "mitilog backfill: --station needs objects that pass through this command: use "
                "--retrieve get, or --move-listen-port to receive the C-MOVE here\n");
        goto done;
    }
    settings.dicom_max_pdu = config.max_pdu_bytes;
    settings.max_object_bytes = config.max_object_bytes;
    settings.max_memory_in_flight_bytes = config.max_memory_in_flight_bytes;
    settings.dimse_timeout_seconds = config.dimse_timeout_seconds;
    settings.connect_timeout_seconds = config.backfill_connect_timeout_seconds;

    status = EXIT_STATUS_FAILURE;
    /* Blocked before any thread starts, so that only the stopper takes
     * them. */
    sigemptyset(&stopper.signals);
    sigaddset(&stopper.signals, SIGINT);
    sigaddset(&stopper.signals, SIGTERM);
    sigaddset(&stopper.signals, SIGUSR1); /* the command's end, to the stop thread */
    pthread_sigmask(SIG_BLOCK, &stopper.signals, NULL);
    stopper.store = NULL;
    if (dcm_initialise(LOG_LEVEL_WARNING, &error) != MITILOG_OK ||
        cli_prepare_data_directory(&config, &error) != 0) {
        log_error("backfill: %s", error.text);
        goto done;
    }
    if (cli_open_store(&config, &store, &error) != MITILOG_OK) {
        log_error("backfill: %s", error.text);
        goto done;
    }
    if (store_backfill_lock(store, &held, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog backfill: %s\n", error.text);
        goto done;
    }
    if (held == 0) {
        fprintf(stderr, "mitilog backfill: another backfill is running on this database (perhaps "
                        "on another machine that shares it); wait for it to end, or stop it "
                        "first\n");
        goto done;
    }
    if (held < 0) {
        lock = backfill_lock(config.database_path);
        if (lock < 0)
            goto done;
    }
    if (ingest_create(&config, store, NULL, &pipeline, &error) != MITILOG_OK) {
        log_error("backfill: %s", error.text);
        goto done;
    }
    stopper.store = store;
    stop_started = pthread_create(&stop_thread, NULL, backfill_stop_thread, &stopper) == 0;
    backfill_totals totals;
    mitilog_status ran = backfill_run(&settings, store, pipeline, stdout, &totals, &error);
    ingest_flush(pipeline);
    if (ran != MITILOG_OK) {
        fprintf(stderr, "mitilog backfill: %s\n", error.text);
    } else {
        printf("backfill finished: %ld studies found, %ld done, %ld already done before, %ld "
               "failed; %ld objects stored, %ld not stored, %ld skipped\n",
               totals.studies_found, totals.studies_done, totals.studies_already_done,
               totals.studies_failed, totals.objects_stored, totals.objects_failed,
               totals.objects_skipped);
        status = totals.studies_failed > 0 ? EXIT_STATUS_FAILURE : EXIT_STATUS_SUCCESS;
    }
done:
    if (stop_started) {
        pthread_kill(stop_thread, SIGUSR1);
        pthread_join(stop_thread, NULL);
    }
    ingest_free(pipeline);
    store_close(store);
    if (lock >= 0)
        close(lock);
    config_free(&config);
    return status;
}
