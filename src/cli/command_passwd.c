/* mitilog passwd [--role viewer|reviewer|sender] USER: prints a password-file
 * line for [http] password_file, reading the password from standard input
 * (not echoed on a terminal). */
#include <stdio.h>
#include <string.h>
#include <termios.h>
#include <unistd.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "http/http_auth.h"

static int read_password(char *buffer, size_t size)
{
    struct termios saved, quiet;
    int terminal = isatty(STDIN_FILENO) && tcgetattr(STDIN_FILENO, &saved) == 0;
    if (terminal) {
        fputs("password: ", stderr);
        quiet = saved;
        quiet.c_lflag &= ~(tcflag_t)ECHO;
        tcsetattr(STDIN_FILENO, TCSAFLUSH, &quiet);
    }
    char *line = fgets(buffer, (int)size, stdin);
    if (terminal) {
        tcsetattr(STDIN_FILENO, TCSAFLUSH, &saved);
        fputc('\n', stderr);
    }
    if (line == NULL)
        return -1;
    buffer[strcspn(buffer, "\r\n")] = '\0';
    return buffer[0] == '\0' ? -1 : 0;
}

int command_passwd(int argc, char **argv)
{
    const char *role = NULL;
    if (argc == 4 && strcmp(argv[1], "--role") == 0) {
        role = argv[2];
        argv += 2;
        argc -= 2;
    }
    int bad_role = role != NULL && strcmp(role, "viewer") != 0 && strcmp(role, "reviewer") != 0 &&
                   strcmp(role, "sender") != 0;
    if (cli_wants_help(argc, argv) || argc != 2 || strchr(argv[1], ':') != NULL || bad_role) {
        fprintf(argc == 2 && !bad_role ? stdout : stderr,
                "usage: mitilog passwd [--role viewer|reviewer|sender] USER\n"
                "Reads a password from standard input and prints 'USER:HASH' (yescrypt,\n"
                "libxcrypt), or 'USER:HASH:ROLE' with --role, for the file named by\n"
                "[http] password_file. viewer (the default) reads; reviewer also records\n"
                "reviews of findings; sender stores objects with DICOMweb STOW-RS and\n"
                "reads nothing.\n");
        return cli_wants_help(argc, argv) ? EXIT_STATUS_SUCCESS : EXIT_STATUS_USAGE;
    }
    char password[512];
    if (read_password(password, sizeof password) != 0) {
        fprintf(stderr, "mitilog passwd: no password given\n");
        return EXIT_STATUS_USAGE;
    }
    char hash[256];
    mitilog_error error;
    if (http_auth_hash(password, hash, sizeof hash, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog passwd: %s\n", error.text);
        return EXIT_STATUS_FAILURE;
    }
    if (role != NULL)
        printf("%s:%s:%s\n", argv[1], hash, role);
    else
        printf("%s:%s\n", argv[1], hash);
    return EXIT_STATUS_SUCCESS;
}
