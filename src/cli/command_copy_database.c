/* mitilog copy-database --from SQLITE_FILE --to CONNINFO: copies a
 * department's SQLite database into an empty PostgreSQL database (made
 * with PostgreSQL's schema of the same version when it has none) and
 * verifies every table's row count and key checksum (store_copy.h). */
#include <stdio.h>
#include <string.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "store/store_copy.h"

/* Milliseconds a statement waits for a lock held by another program. */
enum { COPY_BUSY_TIMEOUT_MS = 5000 };

static void copy_database_report(void *context, const store_copy_table *table)
{
    (void)context;
    if (table->source_rows < 0)
        printf("  %-36s %12lld rows, one per instance%s\n", table->name, table->target_rows,
               table->matches ? "" : "  DIFFERENT: not one per instance");
    else
        printf("  %-36s %12lld rows, key checksum %016llx  PostgreSQL: %lld rows, %016llx%s\n",
               table->name, table->source_rows, (unsigned long long)table->source_checksum,
               table->target_rows, (unsigned long long)table->target_checksum,
               table->matches ? "  same" : "  DIFFERENT");
}

int command_copy_database(int argc, char **argv)
{
    const char *from = NULL, *to = NULL;
    int usage = 0;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--from") == 0 && i + 1 < argc)
            from = argv[++i];
        else if (strcmp(argv[i], "--to") == 0 && i + 1 < argc)
            to = argv[++i];
        else
            usage = 1;
    }
    int help = cli_wants_help(argc, argv);
    if (help || usage || from == NULL || to == NULL) {
        fprintf(help ? stdout : stderr,
                "usage: mitilog copy-database --from SQLITE_FILE --to CONNINFO\n"
                "Copies every table of a mitilog SQLite database into an empty PostgreSQL\n"
                "database (libpq connection string, e.g. 'host=db dbname=mitilog user=mitilog'),\n"
                "giving it PostgreSQL's schema of the same version when it has none. Each\n"
                "table is copied in one transaction; then the rows and a checksum of the key\n"
                "columns of every table are compared and printed. A target that holds data,\n"
                "or another schema version, is refused and left unchanged. Stop the programs\n"
                "that write the SQLite database first. Exit status 0 when every table is the\n"
                "same on both sides, 1 otherwise.\n");
        return help ? EXIT_STATUS_SUCCESS : EXIT_STATUS_USAGE;
    }
    mitilog_error error;
    store_copy_summary summary;
    printf("copying %s into PostgreSQL\n", from);
    fflush(stdout);
    if (store_copy_database(from, to, COPY_BUSY_TIMEOUT_MS, copy_database_report, NULL, &summary,
                            &error) != MITILOG_OK) {
        fflush(stdout);
        fprintf(stderr, "mitilog copy-database: %s\n", error.text);
        return EXIT_STATUS_FAILURE;
    }
    if (summary.mismatched_tables > 0) {
        printf("%d of %d tables differ after the copy (schema version %d): the PostgreSQL "
               "database is not a faithful copy; drop it and copy again into a new one\n",
               summary.mismatched_tables, summary.tables, summary.schema_version);
        return EXIT_STATUS_FAILURE;
    }
    printf("copied %d tables, %lld rows (schema version %d); every table has the same rows and "
           "key checksum in both databases\n",
           summary.tables, summary.rows, summary.schema_version);
    return EXIT_STATUS_SUCCESS;
}
