/* mitilog header [--config FILE] [--output FILE] SOP_INSTANCE_UID: writes
 * the header copy kept for one instance (retention = header: the object
 * as received without its pixel data, a DICOM Part 10 file) to FILE or
 * to standard output, for dcmdump, pydicom or another reader. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "store/store.h"
#include "store/store_instances.h"

int command_header(int argc, char **argv)
{
    const char *config_path = NULL, *output = NULL, *uid = NULL;
    int usage = 0;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--config") == 0 && i + 1 < argc)
            config_path = argv[++i];
        else if (strcmp(argv[i], "--output") == 0 && i + 1 < argc)
            output = argv[++i];
        else if (argv[i][0] != '-' && uid == NULL)
            uid = argv[i];
        else
            usage = 1;
    }
    int help = cli_wants_help(argc, argv);
    if (help || usage || uid == NULL) {
        fprintf(help ? stdout : stderr,
                "usage: mitilog header [--config FILE] [--output FILE] SOP_INSTANCE_UID\n"
                "Writes the header copy kept for the instance (retention = header: the\n"
                "object as received without its pixel data, a DICOM Part 10 file) to FILE,\n"
                "or to standard output. Exit status 1 when no copy is kept for it.\n");
        return help ? EXIT_STATUS_SUCCESS : EXIT_STATUS_USAGE;
    }
    config config;
    if (cli_load_config(config_path, &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    if (cli_require_database("header", &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_FAILURE;
    }
    int exit_status = EXIT_STATUS_FAILURE;
    mitilog_error error;
    store *st = NULL;
    unsigned char *bytes = NULL;
    size_t size = 0;
    if (store_open(config.database_path, (int)config.busy_timeout_ms, &st, &error) != MITILOG_OK ||
        store_get_header(st, uid, &bytes, &size, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog header: %s\n", error.text);
        goto done;
    }
    if (bytes == NULL) {
        fprintf(stderr, "mitilog header: no header copy kept for %s\n", uid);
        goto done;
    }
    FILE *out = output != NULL ? fopen(output, "wb") : stdout;
    if (out == NULL) {
        fprintf(stderr, "mitilog header: cannot write %s\n", output);
        goto done;
    }
    int written = fwrite(bytes, 1, size, out) == size;
    int closed = output != NULL ? fclose(out) == 0 : fflush(out) == 0;
    if (!written || !closed)
        fprintf(stderr, "mitilog header: cannot write %s\n", output != NULL ? output : "stdout");
    else
        exit_status = EXIT_STATUS_SUCCESS;
done:
    free(bytes);
    store_close(st);
    config_free(&config);
    return exit_status;
}
