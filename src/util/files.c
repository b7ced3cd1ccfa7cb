#include "util/files.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/time.h>
#include <time.h>
#include <unistd.h>

mitilog_status files_make_directories(const char *path, mitilog_error *error)
{
    char buffer[4096];
    if (snprintf(buffer, sizeof buffer, "%s", path) >= (int)sizeof buffer)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "path too long: %s", path);
    for (char *cursor = buffer + 1;; cursor++) {
        char saved = *cursor;
        if (saved == '/' || saved == '\0') {
            *cursor = '\0';
            if (mkdir(buffer, 0750) != 0 && errno != EEXIST)
                return mitilog_error_set(error, MITILOG_ERROR_IO, "cannot create %s: %s", buffer,
                                         strerror(errno));
            *cursor = saved;
        }
        if (saved == '\0')
            break;
    }
    return MITILOG_OK;
}

mitilog_status files_copy(const char *from, const char *to, mitilog_error *error)
{
    char temporary[4096];
    snprintf(temporary, sizeof temporary, "%s.part", to);
    int input = open(from, O_RDONLY | O_CLOEXEC);
    if (input < 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", from, strerror(errno));
    int output = open(temporary, O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0640);
    if (output < 0) {
        close(input);
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", temporary, strerror(errno));
    }
    mitilog_status status = MITILOG_OK;
    char buffer[65536];
    ssize_t count;
    while ((count = read(input, buffer, sizeof buffer)) > 0) {
        for (ssize_t done = 0; done < count;) {
            ssize_t written = write(output, buffer + done, (size_t)(count - done));
            if (written < 0) {
                status = mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", temporary,
                                           strerror(errno));
                goto finish;
            }
            done += written;
        }
    }
    if (count < 0)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", from, strerror(errno));
    else if (fsync(output) != 0)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", temporary, strerror(errno));
finish:
    close(input);
    if (close(output) != 0 && status == MITILOG_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", temporary, strerror(errno));
    if (status == MITILOG_OK && rename(temporary, to) != 0)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", to, strerror(errno));
    if (status != MITILOG_OK)
        unlink(temporary);
    return status;
}

mitilog_status files_move(const char *from, const char *to, mitilog_error *error)
{
    if (rename(from, to) == 0)
        return MITILOG_OK;
    if (errno != EXDEV)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "move %s to %s: %s", from, to,
                                 strerror(errno));
    mitilog_status status = files_copy(from, to, error);
    if (status == MITILOG_OK)
        unlink(from);
    return status;
}

void files_utc_now(char *out, size_t size)
{
    struct timeval now;
    struct tm broken;
    gettimeofday(&now, NULL);
    gmtime_r(&now.tv_sec, &broken);
    char seconds[24];
    strftime(seconds, sizeof seconds, "%Y-%m-%dT%H:%M:%S", &broken);
    snprintf(out, size, "%s.%03ldZ", seconds, (long)(now.tv_usec / 1000));
}
