#include "cli/cli_options.h"

#include <stdio.h>
#include <string.h>

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
