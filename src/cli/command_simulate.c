/*
 * command_simulate.c - `mitilog simulate`: writes a simulated ultrasound
 * department's DICOM files (src/sim), optionally streaming them to a
 * running daemon. See docs/demo.md.
 */
#include "cli/commands.h"

#include <errno.h>
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "dicom/dcm.h"
#include "sim/sim.h"

static void simulate_usage(FILE *out)
{
    fprintf(out, "usage: mitilog simulate --out DIR [--days N] [--seed S]\n"
                 "                        [--start YYYY-MM-DD] [--site N]\n"
                 "                        [--matrix COLUMNSxROWS | --screens [--compress]]\n"
                 "       mitilog simulate --send HOST:PORT [--out DIR] [--days N]\n"
                 "                        [--seed S] [--start YYYY-MM-DD] [--aet AE]\n"
                 "                        [--called-aet AE] [--speed X] [--screens]\n"
                 "                        [--compress]\n"
                 "\n"
                 "Writes an invented ultrasound department's DICOM files (US images,\n"
                 "cine loops, acoustic output SRs) to DIR/<date>/<study>/<n>.dcm plus\n"
                 "DIR/manifest.csv (the simulator's ground truth: planted problems).\n"
                 "The same seed gives byte-identical files.\n"
                 "\n"
                 "  --out DIR         output directory (created; required unless --send)\n"
                 "  --days N          days to simulate, 1-366 (default 28)\n"
                 "  --seed S          random seed, unsigned 64-bit (default 1)\n"
                 "  --start DATE      first day (default 2026-11-02, a Monday)\n"
                 "  --site N          site 1-9 (default 1): N > 1 appends -N to the\n"
                 "                    rooms' station names, AE titles and serials;\n"
                 "                    other seeds over the same days at other sites\n"
                 "                    make a bigger department\n"
                 "  --matrix CxR      pixel matrix of single frames, 2x2 to 2048x2048\n"
                 "                    (cine frames: half each way); default 32x24,\n"
                 "                    tiny; e.g. 640x480 gives objects of realistic size\n"
                 "  --screens         each room's scanner has its own identity and matrix\n"
                 "                    and burns MI/TI into the pixels (fonts from\n"
                 "                    Debian's font packages); US-ROOM-4 writes no\n"
                 "                    indices into the header; manifest.csv gets the\n"
                 "                    text and pixel box of every index drawn\n"
                 "  --compress        with --screens: scanners that compress write their\n"
                 "                    images as JPEG baseline, JPEG-LS or RLE\n"
                 "  --send HOST:PORT  stream the studies with storescu in time order\n"
                 "  --aet AE          calling AE title (default: each room's own)\n"
                 "  --called-aet AE   called AE title (default MITILOG)\n"
                 "  --speed X         simulated time runs X times real time\n"
                 "                    (default 0 = as fast as possible)\n"
                 "  --help            this text\n");
}

static int simulate_bad(const char *message, const char *value)
{
    fprintf(stderr, "mitilog simulate: %s%s%s\n", message, value ? ": " : "", value ? value : "");
    fprintf(stderr, "try 'mitilog simulate --help'\n");
    return EXIT_STATUS_USAGE;
}

static int simulate_ae_ok(const char *ae)
{
    size_t n = strlen(ae);
    if (n == 0 || n > 16 || strchr(ae, '\\') != NULL)
        return 0;
    for (size_t i = 0; i < n; i++)
        if (ae[i] < 0x20 || ae[i] > 0x7e)
            return 0;
    return 1;
}

int command_simulate(int argc, char **argv)
{
    static const struct option options_table[] = {
        {"out", required_argument, NULL, 'o'},
        {"days", required_argument, NULL, 'd'},
        {"seed", required_argument, NULL, 's'},
        {"start", required_argument, NULL, 'S'},
        {"send", required_argument, NULL, 'n'},
        {"aet", required_argument, NULL, 'a'},
        {"called-aet", required_argument, NULL, 'c'},
        {"speed", required_argument, NULL, 'x'},
        {"site", required_argument, NULL, 'i'},
        {"matrix", required_argument, NULL, 'm'},
        {"screens", no_argument, NULL, 'P'},
        {"compress", no_argument, NULL, 'C'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    sim_options options;
    memset(&options, 0, sizeof options);
    options.days = 28;
    options.seed = 1;
    options.start = (sim_date){2026, 11, 2};
    char host[256] = "";
    char *end = NULL;

    optind = 1;
    opterr = 0;
    for (;;) {
        int c = getopt_long(argc, argv, ":", options_table, NULL);
        if (c == -1)
            break;
        switch (c) {
        case 'o': options.out_directory = optarg; break;
        case 'd': {
            errno = 0;
            long days = strtol(optarg, &end, 10);
            if (errno != 0 || *end != '\0' || days < 1 || days > 366)
                return simulate_bad("--days must be 1-366", optarg);
            options.days = (int)days;
            break;
        }
        case 's':
            errno = 0;
            if (optarg[0] == '-')
                return simulate_bad("--seed must be unsigned", optarg);
            options.seed = strtoull(optarg, &end, 0);
            if (errno != 0 || *end != '\0' || end == optarg)
                return simulate_bad("bad --seed", optarg);
            break;
        case 'S':
            if (sim_date_parse(optarg, &options.start) != 0)
                return simulate_bad("--start must be YYYY-MM-DD", optarg);
            break;
        case 'n': {
            const char *colon = strrchr(optarg, ':');
            if (colon == NULL || colon == optarg || (size_t)(colon - optarg) >= sizeof host)
                return simulate_bad("--send must be HOST:PORT", optarg);
            errno = 0;
            unsigned long port = strtoul(colon + 1, &end, 10);
            if (errno != 0 || *end != '\0' || port < 1 || port > 65535)
                return simulate_bad("bad port in --send", optarg);
            memcpy(host, optarg, (size_t)(colon - optarg));
            host[colon - optarg] = '\0';
            options.send_host = host;
            options.send_port = (unsigned)port;
            break;
        }
        case 'a':
            if (!simulate_ae_ok(optarg))
                return simulate_bad("bad --aet (1-16 printable chars)", optarg);
            options.calling_ae = optarg;
            break;
        case 'c':
            if (!simulate_ae_ok(optarg))
                return simulate_bad("bad --called-aet", optarg);
            options.called_ae = optarg;
            break;
        case 'i': {
            errno = 0;
            long site = strtol(optarg, &end, 10);
            if (errno != 0 || *end != '\0' || site < 1 || site > 9)
                return simulate_bad("--site must be 1-9", optarg);
            options.site = (int)site;
            break;
        }
        case 'm': {
            unsigned columns = 0, rows = 0;
            char extra = 0;
            if (sscanf(optarg, "%ux%u%c", &columns, &rows, &extra) != 2 || columns < 2 ||
                rows < 2 || columns > 2048 || rows > 2048)
                return simulate_bad("--matrix must be COLUMNSxROWS, 2 to 2048 each", optarg);
            options.matrix_columns = columns;
            options.matrix_rows = rows;
            break;
        }
        case 'P': options.screens = 1; break;
        case 'C': options.compress = 1; break;
        case 'x':
            errno = 0;
            options.speed = strtod(optarg, &end);
            if (errno != 0 || *end != '\0' || !(options.speed >= 0.0))
                return simulate_bad("--speed must be >= 0", optarg);
            break;
        case 'h': simulate_usage(stdout); return EXIT_STATUS_SUCCESS;
        case ':': return simulate_bad("missing value for", argv[optind - 1]);
        default: return simulate_bad("unknown option", argv[optind - 1]);
        }
    }
    if (optind < argc)
        return simulate_bad("unexpected argument", argv[optind]);
    if (options.out_directory == NULL && options.send_host == NULL)
        return simulate_bad("--out DIR is required", NULL);
    if (options.screens && options.matrix_columns > 0)
        return simulate_bad("--matrix cannot be combined with --screens "
                            "(each scanner has its own matrix)",
                            NULL);
    if (options.compress && !options.screens)
        return simulate_bad("--compress needs --screens (only the screen "
                            "scanners compress)",
                            NULL);

    char temporary[64] = "";
    if (options.out_directory == NULL) {
        const char *tmp = getenv("TMPDIR");
        snprintf(temporary, sizeof temporary, "%s/mitilog-sim-XXXXXX",
                 tmp != NULL && strlen(tmp) < 40 ? tmp : "/tmp");
        if (mkdtemp(temporary) == NULL) {
            fprintf(stderr, "mitilog simulate: mkdtemp: %s\n", strerror(errno));
            return EXIT_STATUS_FAILURE;
        }
        options.out_directory = temporary;
    }

    mitilog_error error = {{0}};
    if (dcm_initialise(3, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog simulate: %s\n", error.text);
        return EXIT_STATUS_FAILURE;
    }
    sim_run run;
    struct timespec t0, t1;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    mitilog_status status = sim_write_all(&options, &run, &error);
    clock_gettime(CLOCK_MONOTONIC, &t1);
    if (status != MITILOG_OK) {
        fprintf(stderr, "mitilog simulate: %s\n", error.text);
        sim_run_free(&run);
        return EXIT_STATUS_FAILURE;
    }
    printf("wrote %zu file(s), %zu stud%s (%llu bytes) to %s in %.1f s\n", run.file_count,
           run.study_count, run.study_count == 1 ? "y" : "ies", run.bytes, options.out_directory,
           (double)(t1.tv_sec - t0.tv_sec) + (t1.tv_nsec - t0.tv_nsec) / 1e9);
    fflush(stdout);
    int exit_status = EXIT_STATUS_SUCCESS;
    if (options.send_host != NULL) {
        status = sim_send_all(&options, &run, &error);
        if (status != MITILOG_OK) {
            fprintf(stderr, "mitilog simulate: %s\n", error.text);
            exit_status = EXIT_STATUS_FAILURE;
        }
        if (temporary[0] != '\0')
            printf("files kept in %s\n", temporary);
    }
    sim_run_free(&run);
    return exit_status;
}
