/*
 * commands.h - the subcommands of the mitilog executable. Each takes the
 * arguments after its own name (argv[0] is the subcommand name), prints
 * its own --help, and returns the process exit status (documented in
 * README.md: 0 success, 1 runtime failure or rejected input, 2 usage or
 * configuration error).
 */
#ifndef MITILOG_COMMANDS_H
#define MITILOG_COMMANDS_H

int command_serve(int argc, char **argv);
int command_import(int argc, char **argv);
int command_backfill(int argc, char **argv);
int command_check_config(int argc, char **argv);
int command_simulate(int argc, char **argv);
int command_inspect(int argc, char **argv);
int command_report(int argc, char **argv);
int command_rescore(int argc, char **argv);
int command_passwd(int argc, char **argv);
int command_header(int argc, char **argv);
int command_frame(int argc, char **argv);
int command_device(int argc, char **argv);
int command_copy_database(int argc, char **argv);

enum { EXIT_STATUS_SUCCESS = 0, EXIT_STATUS_FAILURE = 1, EXIT_STATUS_USAGE = 2 };

#endif
