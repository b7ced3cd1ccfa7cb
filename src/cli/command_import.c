/* mitilog import --config FILE PATH...: files and folders (recursively)
 * through the same pipeline as network objects. */
#define _XOPEN_SOURCE 700
#include <ftw.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "dicom/dcm.h"
#include "ingest/ingest.h"
#include "store/store.h"
#include "util/log.h"

typedef struct import_totals {
    unsigned long imported, replaced, rejected, failed;
} import_totals;

/* nftw() has no user pointer: the walk's state lives here for its duration. */
static ingest *walk_ingest;
static import_totals *walk_totals;

static void import_one(const char *path)
{
    ingest_source source = {path, 0, "", "", "", "", 0};
    mitilog_error reason;
    switch (ingest_object(walk_ingest, &source, &reason)) {
    case INGEST_OUTCOME_STORED: walk_totals->imported++; break;
    case INGEST_OUTCOME_REPLACED: walk_totals->replaced++; break;
    case INGEST_OUTCOME_REJECTED: walk_totals->rejected++; break;
    case INGEST_OUTCOME_NOT_STORED: walk_totals->failed++; break;
    }
}

static int visit(const char *path, const struct stat *info, int type, struct FTW *walk)
{
    (void)info;
    (void)walk;
    if (type == FTW_F)
        import_one(path);
    else if (type == FTW_DNR || type == FTW_NS) {
        log_warning("import: %s cannot be read", path);
        walk_totals->rejected++;
    }
    return 0;
}

static void print_import_usage(FILE *out)
{
    fprintf(out, "usage: mitilog import [--config FILE] PATH...\n"
                 "Reads DICOM files, and folders recursively, into the database. Prints one\n"
                 "summary line. Exit status: 0 all stored, 1 something was rejected or could\n"
                 "not be stored (reasons on stderr and in the rejections table), 2 usage.\n");
}

int command_import(int argc, char **argv)
{
    const char *config_path = NULL;
    int first_path = 0;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0) {
            print_import_usage(stdout);
            return EXIT_STATUS_SUCCESS;
        } else if (strcmp(argv[i], "--config") == 0 && i + 1 < argc) {
            config_path = argv[++i];
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
    config config;
    if (cli_load_config(config_path, &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    mitilog_error error;
    store *store = NULL;
    ingest *pipeline = NULL;
    import_totals totals = {0, 0, 0, 0};
    int status = EXIT_STATUS_FAILURE;
    if (dcm_initialise(LOG_LEVEL_WARNING, &error) != MITILOG_OK ||
        cli_prepare_data_directory(&config, &error) != 0 ||
        store_open(config.database_path, (int)config.busy_timeout_ms, &store, &error) !=
            MITILOG_OK ||
        /* Nothing is acknowledged to anyone during an import: commits need
         * not be synced one by one. store_close() checkpoints, which syncs
         * the database before the summary line says "imported". */
        store_set_durability(store, STORE_DURABILITY_PROCESS, &error) != MITILOG_OK ||
        ingest_create(&config, store, &pipeline, &error) != MITILOG_OK) {
        log_error("import: %s", error.text);
        goto done;
    }
    walk_ingest = pipeline;
    walk_totals = &totals;
    for (int i = first_path; i < argc; i++) {
        struct stat info;
        if (stat(argv[i], &info) != 0) {
            log_warning("import: %s does not exist", argv[i]);
            totals.rejected++;
        } else if (S_ISDIR(info.st_mode)) {
            nftw(argv[i], visit, 32, FTW_PHYS);
        } else {
            import_one(argv[i]);
        }
    }
    /* Exam records rebuilt, WAL checkpointed and synced: then the summary. */
    ingest_free(pipeline);
    pipeline = NULL;
    store_close(store);
    store = NULL;
    printf("imported %lu, replaced %lu, rejected %lu, not stored %lu\n", totals.imported,
           totals.replaced, totals.rejected, totals.failed);
    status = totals.rejected + totals.failed > 0 ? EXIT_STATUS_FAILURE : EXIT_STATUS_SUCCESS;
done:
    ingest_free(pipeline);
    store_close(store);
    config_free(&config);
    return status;
}
