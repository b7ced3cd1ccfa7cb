/* mitilog: the executable's entry point; dispatches to a subcommand. */
#include <malloc.h>
#include <stdio.h>
#include <string.h>

#include "cli/commands.h"

typedef struct subcommand {
    const char *name;
    int (*run)(int argc, char **argv);
    const char *summary;
} subcommand;

static const subcommand subcommands[] = {
    {"serve", command_serve, "run the DICOM receiver and the HTTP dashboard"},
    {"import", command_import, "read DICOM files or folders into the database"},
    {"backfill", command_backfill, "fetch past ultrasound studies from the PACS (C-FIND, C-GET)"},
    {"check-config", command_check_config, "validate a configuration and print it"},
    {"rescore", command_rescore, "re-evaluate stored exams under the current ALARA policy"},
    {"inspect", command_inspect, "print what mitilog extracts from one DICOM file"},
    {"frame", command_frame, "write one decoded frame of a DICOM file as PGM/PPM"},
    {"header", command_header, "write the header copy kept for one instance"},
    {"device", command_device, "set up the screen profiles of devices that draw the indices"},
    {"passwd", command_passwd, "make a password-file line for the HTTP login"},
    {"report", command_report, "write the weekly outlier list or exposure statistics"},
    {"simulate", command_simulate, "generate a fictional department's ultrasound traffic"},
    {"copy-database", command_copy_database, "copy an SQLite database into PostgreSQL"},
};

static void print_usage(FILE *out)
{
    fprintf(out,
            "usage: mitilog SUBCOMMAND [OPTIONS]\n"
            "\n"
            "mitilog %s audits the acoustic output (MI, TIS, TIB, TIC) displayed on\n"
            "ultrasound images received over DICOM. It advises; the department's\n"
            "safety policy, its medical physicist and local regulation decide.\n"
            "\n"
            "subcommands:\n",
            MITILOG_VERSION);
    for (size_t i = 0; i < sizeof subcommands / sizeof subcommands[0]; i++)
        fprintf(out, "  %-14s %s\n", subcommands[i].name, subcommands[i].summary);
    fprintf(out, "\n'mitilog SUBCOMMAND --help' describes each one.\n");
}

/* Memory freed at the top of a heap is kept for reuse up to this much
 * instead of going back to the kernel at once: SQLite's statement
 * journal allocates and frees page copies for every row written, and
 * glibc's default (a threshold that starts at 128 KiB) returned them with
 * a madvise() call per object (a system call and the page faults after
 * it, per object received). */
enum { MAIN_TRIM_THRESHOLD_BYTES = 4 << 20 };

int main(int argc, char **argv)
{
    mallopt(M_TRIM_THRESHOLD, MAIN_TRIM_THRESHOLD_BYTES);
    if (argc < 2) {
        print_usage(stderr);
        return EXIT_STATUS_USAGE;
    }
    if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0 ||
        strcmp(argv[1], "help") == 0) {
        print_usage(stdout);
        return EXIT_STATUS_SUCCESS;
    }
    if (strcmp(argv[1], "--version") == 0) {
        printf("mitilog %s\n", MITILOG_VERSION);
        return EXIT_STATUS_SUCCESS;
    }
    for (size_t i = 0; i < sizeof subcommands / sizeof subcommands[0]; i++) {
        if (strcmp(argv[1], subcommands[i].name) == 0)
            return subcommands[i].run(argc - 1, argv + 1);
    }
    fprintf(stderr, "mitilog: unknown subcommand '%s'\n\n", argv[1]);
    print_usage(stderr);
    return EXIT_STATUS_USAGE;
}
