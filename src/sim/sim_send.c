/*
 * sim_send.c - streams the written studies to a running daemon with
 * DCMTK's storescu, one invocation per study, in simulated time order,
 * sleeping so that simulated time runs `speed` times real time (0 = as
 * fast as possible). fork/execvp with an argument vector: no shell.
 * TCP_NODELAY=1 is exported to storescu (bench/README.md: without it
 * Nagle's algorithm slows a one-object-at-a-time sender).
 *
 * A study whose images are compressed (--compress) is sent with -R
 * (propose only the presentation contexts the files need) and the -x
 * option that proposes their transfer syntax: without them storescu
 * proposes only uncompressed syntaxes and fails to convert the files.
 */
#include "sim/sim.h"

#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

static double sim_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + ts.tv_nsec / 1e9;
}

static void sim_sleep(double seconds)
{
    while (seconds > 0) {
        struct timespec ts = {(time_t)seconds, (long)((seconds - (double)(time_t)seconds) * 1e9)};
        struct timespec rest;
        if (nanosleep(&ts, &rest) == 0)
            return;
        if (errno != EINTR)
            return;
        seconds = (double)rest.tv_sec + rest.tv_nsec / 1e9;
    }
}

/* storescu's option that proposes a compressed transfer syntax, or NULL
 * when it has none. */
static const char *sim_storescu_propose(const char *syntax)
{
    static const struct {
        const char *uid;
        const char *option;
    } table[] = {
        {"1.2.840.10008.1.2.4.50", "-xy"}, /* JPEG baseline (8 bit) */
        {"1.2.840.10008.1.2.4.80", "-xt"}, /* JPEG-LS lossless */
        {"1.2.840.10008.1.2.5", "-xr"},    /* RLE lossless */
    };
    for (size_t i = 0; i < sizeof table / sizeof table[0]; i++)
        if (strcmp(table[i].uid, syntax) == 0)
            return table[i].option;
    return NULL;
}

/* Runs storescu on the study's files; returns its exit status or -1. */
static int sim_storescu(const sim_options *options, const char *calling,
                        const sim_study_record *study)
{
    char port[16];
    snprintf(port, sizeof port, "%u", options->send_port);
    size_t max = study->file_count + 16;
    char **argv = calloc(max, sizeof *argv);
    char(*paths)[4096] = calloc(study->file_count, sizeof *paths);
    if (argv == NULL || paths == NULL) {
        free(argv);
        free(paths);
        return -1;
    }
    size_t n = 0;
    argv[n++] = (char *)(options->storescu ? options->storescu : "storescu");
    argv[n++] = (char *)"-aet";
    argv[n++] = (char *)calling;
    argv[n++] = (char *)"-aec";
    argv[n++] = (char *)(options->called_ae ? options->called_ae : "MITILOG");
    argv[n++] = (char *)"-nh"; /* keep going: failures counted by exit */
    if (study->compressed_syntax != NULL) {
        const char *propose = sim_storescu_propose(study->compressed_syntax);
        if (propose == NULL) {
            fprintf(stderr, "simulate: no storescu option proposes %s\n", study->compressed_syntax);
            free(argv);
            free(paths);
            return -1;
        }
        argv[n++] = (char *)"-R";
        argv[n++] = (char *)propose;
    }
    argv[n++] = (char *)options->send_host;
    argv[n++] = port;
    for (size_t i = 0; i < study->file_count; i++) {
        snprintf(paths[i], sizeof paths[i], "%s/%s/%03zu.dcm", options->out_directory,
                 study->directory, i + 1);
        argv[n++] = paths[i];
    }
    argv[n] = NULL;

    int status = -1;
    fflush(NULL);
    pid_t pid = fork();
    if (pid == 0) {
        setenv("TCP_NODELAY", "1", 1);
        execvp(argv[0], argv);
        fprintf(stderr, "simulate: cannot run %s: %s\n", argv[0], strerror(errno));
        _exit(127);
    }
    if (pid > 0) {
        int wstatus = 0;
        while (waitpid(pid, &wstatus, 0) < 0 && errno == EINTR) {
        }
        status = WIFEXITED(wstatus) ? WEXITSTATUS(wstatus) : -1;
    }
    free(argv);
    free(paths);
    return status;
}

mitilog_status sim_send_all(const sim_options *options, const sim_run *run, mitilog_error *error)
{
    size_t sent = 0, failed = 0, batches_failed = 0;
    double real_start = sim_now();
    long sim_start = run->study_count > 0 ? run->studies[0].send_second : 0;
    for (size_t i = 0; i < run->study_count; i++) {
        const sim_study_record *study = &run->studies[i];
        if (options->speed > 0) {
            double due = (double)(study->send_second - sim_start) / options->speed;
            double wait = due - (sim_now() - real_start);
            if (wait > 0)
                sim_sleep(wait);
        }
        char site_ae[17];
        const char *calling = options->calling_ae ? options->calling_ae
                                                  : sim_site_name(sim_rooms[study->room].ae_title,
                                                                  options->site, site_ae);
        int rc = sim_storescu(options, calling, study);
        if (rc == 0) {
            sent += study->file_count;
        } else {
            failed += study->file_count;
            batches_failed++;
        }
        printf("batch %zu/%zu: %s%s from %s: %zu object(s) %s\n", i + 1, run->study_count,
               study->directory, study->is_resend ? " (resend)" : "", calling, study->file_count,
               rc == 0 ? "sent" : "FAILED");
        fflush(stdout);
    }
    printf("summary: %zu object(s) sent, %zu failed, %zu batch(es) failed, "
           "%.1f s\n",
           sent, failed, batches_failed, sim_now() - real_start);
    if (batches_failed > 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%zu batch(es) failed to send",
                                 batches_failed);
    return MITILOG_OK;
}
