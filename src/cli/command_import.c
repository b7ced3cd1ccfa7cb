/* mitilog import --config FILE [--jobs N] PATH...: files and folders
 * (recursively) through the same pipeline as network objects, several
 * files at once. */
#include <errno.h>
#include <fts.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "dicom/dcm.h"
#include "ingest/ingest.h"
#include "store/store.h"
#include "util/log.h"

typedef struct import_totals {
    unsigned long imported, replaced, rejected, failed;
} import_totals;

/* The walk hands paths to the workers through a small ring: the workers
 * read and commit files at once (group commit puts their rows in shared
 * transactions), while the walk goes on finding the next ones. */
enum { IMPORT_QUEUE_SIZE = 256, IMPORT_JOBS_MAX = 16 };

typedef struct import_queue {
    pthread_mutex_t lock;
    pthread_cond_t changed;
    char *paths[IMPORT_QUEUE_SIZE];
    size_t head, count;
    int closed; /* the walk is over */
    ingest *pipeline;
    import_totals totals; /* under lock */
} import_queue;

static void import_count(import_queue *queue, ingest_outcome outcome)
{
    pthread_mutex_lock(&queue->lock);
    switch (outcome) {
    case INGEST_OUTCOME_STORED: queue->totals.imported++; break;
    case INGEST_OUTCOME_REPLACED: queue->totals.replaced++; break;
    case INGEST_OUTCOME_REJECTED:
    case INGEST_OUTCOME_MISMATCHED: queue->totals.rejected++; break;
    case INGEST_OUTCOME_NOT_STORED: queue->totals.failed++; break;
    }
    pthread_mutex_unlock(&queue->lock);
}

static void import_one(import_queue *queue, const char *path)
{
    ingest_source source = {path, 0, "", "", "", "", 0, NULL};
    mitilog_error reason;
    import_count(queue, ingest_object(queue->pipeline, &source, &reason));
}

static void *import_worker(void *argument)
{
    import_queue *queue = argument;
    pthread_mutex_lock(&queue->lock);
    for (;;) {
        while (queue->count == 0 && !queue->closed)
            pthread_cond_wait(&queue->changed, &queue->lock);
        if (queue->count == 0)
            break;
        char *path = queue->paths[queue->head];
        queue->head = (queue->head + 1) % IMPORT_QUEUE_SIZE;
        queue->count--;
        pthread_cond_broadcast(&queue->changed);
        pthread_mutex_unlock(&queue->lock);
        import_one(queue, path);
        free(path);
        pthread_mutex_lock(&queue->lock);
    }
    pthread_mutex_unlock(&queue->lock);
    return NULL;
}

/* Queues path for the workers (waits while the ring is full). Without
 * memory for its copy the file is counted as not stored. */
static void import_queue_push(import_queue *queue, const char *path)
{
    char *copy = strdup(path);
    if (copy == NULL) {
        log_error("import: %s: out of memory, not stored", path);
        import_count(queue, INGEST_OUTCOME_NOT_STORED);
        return;
    }
    pthread_mutex_lock(&queue->lock);
    while (queue->count == IMPORT_QUEUE_SIZE)
        pthread_cond_wait(&queue->changed, &queue->lock);
    queue->paths[(queue->head + queue->count) % IMPORT_QUEUE_SIZE] = copy;
    queue->count++;
    pthread_cond_broadcast(&queue->changed);
    pthread_mutex_unlock(&queue->lock);
}

/* Every file under folder onto the queue (links not followed, the
 * working directory kept); what cannot be read is counted as rejected. */
static void import_walk(import_queue *queue, const char *folder)
{
    char *roots[] = {(char *)folder, NULL};
    FTS *walk = fts_open(roots, FTS_PHYSICAL | FTS_NOCHDIR, NULL);
    if (walk == NULL) {
        log_warning("import: %s cannot be read: %s", folder, strerror(errno));
        import_count(queue, INGEST_OUTCOME_REJECTED);
        return;
    }
    FTSENT *entry;
    while ((entry = fts_read(walk)) != NULL) {
        switch (entry->fts_info) {
        case FTS_F:
        case FTS_DEFAULT: /* not a folder nor a link: the reader decides */
            import_queue_push(queue, entry->fts_path);
            break;
        case FTS_DNR:
        case FTS_NS:
        case FTS_ERR:
            log_warning("import: %s cannot be read", entry->fts_path);
            import_count(queue, INGEST_OUTCOME_REJECTED);
            break;
        default: /* folders (before and after), links, cycles */ break;
        }
    }
    fts_close(walk);
}

/* Workers by default: two per processor online (while one waits for the
 * commit that holds its row, the other reads the next file), at most 8. */
static unsigned import_default_jobs(void)
{
    long online = sysconf(_SC_NPROCESSORS_ONLN);
    return online < 1 ? 2 : online > 4 ? 8 : (unsigned)(2 * online);
}

static void print_import_usage(FILE *out)
{
    fprintf(out,
            "usage: mitilog import [--config FILE] [--jobs N] [--site NAME] PATH...\n"
            "Reads DICOM files, and folders recursively, into the database. Prints one\n"
            "summary line. Exit status: 0 all stored, 1 something was rejected or could\n"
            "not be stored (reasons on stderr and in the rejections table), 2 usage\n"
            "(also a PATH that does not exist).\n"
            "  --jobs N   files read at once, 1-%d (default: two per processor, at most 8)\n"
            "  --site S   the site recorded on what is imported (default: [receiver] site)\n",
            IMPORT_JOBS_MAX);
}

int command_import(int argc, char **argv)
{
    const char *config_path = NULL;
    const char *site = NULL;
    int first_path = 0;
    unsigned jobs = import_default_jobs();
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            print_import_usage(stdout);
            return EXIT_STATUS_SUCCESS;
        } else if (strcmp(argv[i], "--config") == 0 && i + 1 < argc) {
            config_path = argv[++i];
        } else if (strcmp(argv[i], "--site") == 0 && i + 1 < argc) {
            char reason[160];
            site = argv[++i];
            if (!exam_site_name_check(site, reason, sizeof reason)) {
                fprintf(stderr, "mitilog import: --site %s: %s\n", site, reason);
                return EXIT_STATUS_USAGE;
            }
        } else if (strcmp(argv[i], "--jobs") == 0 && i + 1 < argc) {
            char *end = NULL;
            long value = strtol(argv[++i], &end, 10);
            if (end == argv[i] || *end != '\0' || value < 1 || value > IMPORT_JOBS_MAX) {
                print_import_usage(stderr);
                return EXIT_STATUS_USAGE;
            }
            jobs = (unsigned)value;
        } else if (argv[i][0] == '-' && strcmp(argv[i], "--") != 0) {
            print_import_usage(stderr);
            return EXIT_STATUS_USAGE;
        } else {
            first_path = strcmp(argv[i], "--") == 0 ? i + 1 : i;
            break;
        }
    }
    if (first_path == 0 || first_path >= argc) {
        print_import_usage(stderr);
        return EXIT_STATUS_USAGE;
    }
    /* A path that is not there is a mistake in the command, not an object
     * to reject: say so before anything is opened or imported. */
    int missing = 0;
    for (int i = first_path; i < argc; i++) {
        struct stat info;
        if (stat(argv[i], &info) != 0) {
            fprintf(stderr, "mitilog import: %s: %s; check the path (nothing was imported)\n",
                    argv[i], strerror(errno));
            missing = 1;
        }
    }
    if (missing)
        return EXIT_STATUS_USAGE;
    config config;
    if (cli_load_config(config_path, &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    if (site != NULL) {
        char *copy = strdup(site);
        if (copy == NULL) {
            config_free(&config);
            return EXIT_STATUS_FAILURE;
        }
        free(config.receiver_site);
        config.receiver_site = copy;
    }
    mitilog_error error;
    store *store = NULL;
    ingest *pipeline = NULL;
    import_queue queue;
    memset(&queue, 0, sizeof queue);
    pthread_mutex_init(&queue.lock, NULL);
    pthread_cond_init(&queue.changed, NULL);
    pthread_t workers[IMPORT_JOBS_MAX];
    unsigned started = 0;
    int status = EXIT_STATUS_FAILURE;
    if (dcm_initialise(LOG_LEVEL_WARNING, &error) != MITILOG_OK ||
        cli_prepare_data_directory(&config, &error) != 0 ||
        cli_open_store(&config, &store, &error) != MITILOG_OK ||
        /* Nothing is acknowledged to anyone during an import: commits need
         * not be synced one by one. store_close() checkpoints, which syncs
         * the database before the summary line says "imported". */
        store_set_durability(store, STORE_DURABILITY_PROCESS, &error) != MITILOG_OK ||
        ingest_create(&config, store, NULL, &pipeline, &error) != MITILOG_OK) {
        log_error("import: %s", error.text);
        goto done;
    }
    queue.pipeline = pipeline;
    for (; started < jobs; started++)
        if (pthread_create(&workers[started], NULL, import_worker, &queue) != 0)
            break;
    if (started == 0) {
        log_error("import: cannot start a worker thread");
        goto done;
    }
    for (int i = first_path; i < argc; i++) {
        struct stat info;
        if (stat(argv[i], &info) != 0) {
            log_warning("import: %s does not exist", argv[i]);
            import_count(&queue, INGEST_OUTCOME_REJECTED);
        } else if (S_ISDIR(info.st_mode)) {
            import_walk(&queue, argv[i]);
        } else {
            import_queue_push(&queue, argv[i]);
        }
    }
    pthread_mutex_lock(&queue.lock);
    queue.closed = 1;
    pthread_cond_broadcast(&queue.changed);
    pthread_mutex_unlock(&queue.lock);
    for (unsigned i = 0; i < started; i++)
        pthread_join(workers[i], NULL);
    started = 0;
    /* Pixels read, exam records rebuilt, WAL checkpointed and synced:
     * then the summary. */
    ingest_flush(pipeline);
    ingest_free(pipeline);
    pipeline = NULL;
    store_close(store);
    store = NULL;
    const import_totals *totals = &queue.totals;
    printf("imported %lu, replaced %lu, rejected %lu, not stored %lu\n", totals->imported,
           totals->replaced, totals->rejected, totals->failed);
    status = totals->rejected + totals->failed > 0 ? EXIT_STATUS_FAILURE : EXIT_STATUS_SUCCESS;
done:
    ingest_free(pipeline);
    store_close(store);
    pthread_cond_destroy(&queue.changed);
    pthread_mutex_destroy(&queue.lock);
    config_free(&config);
    return status;
}
