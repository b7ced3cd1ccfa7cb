#include "cli/cli_options.h"

#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "util/files.h"
#include "util/log.h"

int cli_wants_help(int argc, char **argv)
{
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--help") == 0 || strcmp(argv[i], "-h") == 0)
            return 1;
    }
    return 0;
}

int cli_load_config(const char *path, config *config)
{
    mitilog_error error;
    mitilog_status status =
        path ? config_load(path, config, &error) : config_set_defaults(config, &error);
    if (status != MITILOG_OK) {
        fprintf(stderr, "mitilog: %s\n", error.text);
        return -1;
    }
    log_level level = LOG_LEVEL_INFO;
    log_parse_level(config->log_level, &level);
    log_set_level(level);
    return 0;
}

int cli_prepare_data_directory(const config *config, mitilog_error *error)
{
    if (files_make_directories(config->data_directory, error) != MITILOG_OK)
        return -1;
    /* The database may live elsewhere: make its folder too. */
    char folder[4096];
    snprintf(folder, sizeof folder, "%s", config->database_path);
    char *slash = strrchr(folder, '/');
    if (slash != NULL && slash != folder) {
        *slash = '\0';
        if (files_make_directories(folder, error) != MITILOG_OK)
            return -1;
    }
    return 0;
}

mitilog_status cli_open_store(const config *config, store **out, mitilog_error *error)
{
    if (strcmp(config->storage_engine, "postgresql") == 0)
        return store_open_postgresql(config->storage_connection, config->storage_read_connection,
                                     (int)config->busy_timeout_ms, out, error);
    return store_open(config->database_path, (int)config->busy_timeout_ms, out, error);
}

int cli_require_database(const char *command, const config *config)
{
    if (strcmp(config->storage_engine, "postgresql") == 0)
        return 0;
    struct stat information;
    if (stat(config->database_path, &information) == 0 && S_ISREG(information.st_mode))
        return 0;
    int defaults = config->source_path == NULL || strcmp(config->source_path, "(defaults)") == 0;
    fprintf(stderr,
            "mitilog %s: no database at %s: nothing has been stored there, and this command\n"
            "only reads, so it does not create one. The path is [storage] data_directory\n"
            "(%s) joined with [storage] database, from %s.\n%s"
            "Give the configuration of the daemon that receives the objects with --config FILE\n"
            "(after deploy/demo.sh: --config demo-data/mitilog.ini).\n",
            command, config->database_path, config->data_directory,
            defaults ? "the built-in defaults" : config->source_path,
            defaults ? "No --config was given: relative paths are from the current folder.\n" : "");
    return -1;
}
