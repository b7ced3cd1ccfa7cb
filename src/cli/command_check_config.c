/* mitilog check-config FILE: validate and print the effective configuration. */
#include <stdio.h>

#include "cli/cli_options.h"
#include "cli/commands.h"

int command_check_config(int argc, char **argv)
{
    if (cli_wants_help(argc, argv) || argc != 2) {
        fprintf(argc == 2 ? stdout : stderr,
                "usage: mitilog check-config FILE\n"
                "Validates FILE and prints the effective configuration (defaults filled\n"
                "in, paths resolved). Exit status 0 if valid, 2 if not; errors name the\n"
                "file, line and key.\n");
        return argc == 2 ? EXIT_STATUS_SUCCESS : EXIT_STATUS_USAGE;
    }
    config config;
    if (cli_load_config(argv[1], &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    config_print(&config, stdout);
    config_free(&config);
    return EXIT_STATUS_SUCCESS;
}
