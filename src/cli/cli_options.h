/*
 * cli_options.h - shared option handling for the subcommands: --config
 * and --help, and loading the configuration with a clear message.
 */
#ifndef MITILOG_CLI_OPTIONS_H
#define MITILOG_CLI_OPTIONS_H

#include "config/config.h"
#include "store/store.h"

/* 1 if argv holds --help or -h. */
int cli_wants_help(int argc, char **argv);
/* Loads path (or the built-in defaults when path is NULL) and sets the log
 * level; on failure prints the reason and returns -1. */
int cli_load_config(const char *path, config *config);

/* Creates the data folder and the database's folder (mode 0750). */
int cli_prepare_data_directory(const config *config, mitilog_error *error);

/* Opens the store [storage] names: the SQLite file, or the PostgreSQL
 * server of connection (reads through read_connection when set). */
mitilog_status cli_open_store(const config *config, store **out, mitilog_error *error);

/* For commands that only read (report, header): 0 when the database the
 * configuration names exists (a PostgreSQL store: always; opening it says
 * whether the server answers); else prints, after "mitilog COMMAND: ", the
 * path, the keys it comes from and what to do, and returns -1. Such a
 * command never creates a database. */
int cli_require_database(const char *command, const config *config);

#endif
