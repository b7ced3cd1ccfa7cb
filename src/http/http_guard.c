/*
 * http_guard.c - a total deadline for receiving each request, whatever
 * the client does byte by byte.
 *
 * libmicrohttpd's own timeout is an idle timeout: every byte restarts it,
 * so a client dribbling one header byte every few seconds holds a
 * connection slot forever. Here every connection is entered in a list
 * when libmicrohttpd opens it (MHD_OPTION_NOTIFY_CONNECTION) with the time
 * its current request began (the connection's start, or the end of the
 * previous reply on a kept-alive connection). The access handler marks
 * the request as received; a watchdog thread shuts down the socket of any
 * connection whose request has not fully arrived within the deadline
 * (TLS handshake included), and libmicrohttpd then closes it as a
 * connection the peer dropped. The socket is only shut down, never
 * closed, here: libmicrohttpd calls the CLOSED notification (which takes
 * the entry out under the same lock) before it closes the descriptor, so
 * the descriptor of a listed entry is always the connection's own.
 *
 * The entry also carries the length of the request target, which the URI
 * log callback sees before libmicrohttpd splits off the parameters.
 */
#include "http/http_internal.h"

#include <arpa/inet.h>
#include <errno.h>
#include <netinet/in.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <time.h>

#include "util/log.h"

typedef struct http_guard_entry {
    struct http_guard_entry *previous, *next;
    int socket;
    struct timespec since; /* start of the request being received */
    int receiving;         /* 1 until the access handler saw the request */
    int cut;               /* shut down by the watchdog */
    unsigned replies;      /* requests answered on this connection */
    size_t target_length;  /* bytes of the request target, query included */
    char address[INET6_ADDRSTRLEN];
} http_guard_entry;

struct http_guard {
    pthread_mutex_t lock;
    pthread_cond_t wake;
    pthread_t thread;
    int thread_started;
    int stopping;
    unsigned deadline_seconds;
    http_guard_entry *first;
    size_t count;
};

static void http_guard_now(struct timespec *now) { clock_gettime(CLOCK_MONOTONIC, now); }

static double http_guard_seconds_since(const struct timespec *since, const struct timespec *now)
{
    return (double)(now->tv_sec - since->tv_sec) + (double)(now->tv_nsec - since->tv_nsec) / 1e9;
}

/* Shuts down the sockets of requests past their deadline. Under lock. */
static void http_guard_sweep(http_guard *guard)
{
    struct timespec now;
    http_guard_now(&now);
    for (http_guard_entry *entry = guard->first; entry != NULL; entry = entry->next) {
        if (!entry->receiving || entry->cut ||
            http_guard_seconds_since(&entry->since, &now) < guard->deadline_seconds)
            continue;
        entry->cut = 1;
        shutdown(entry->socket, SHUT_RDWR);
        /* A kept-alive connection waiting for its next request is usually
         * a browser's idle one, not a slow client: not worth a warning. */
        if (entry->replies > 0)
            log_debug("http: closed a kept-alive connection from %s: no further request "
                      "within %u s",
                      entry->address, guard->deadline_seconds);
        else
            log_warning("http: closed a connection from %s: no whole request within %u s "
                        "([http] request_timeout_seconds)",
                        entry->address, guard->deadline_seconds);
    }
}

static void *http_guard_watch(void *context)
{
    http_guard *guard = context;
    pthread_mutex_lock(&guard->lock);
    while (!guard->stopping) {
        struct timespec until;
        http_guard_now(&until);
        until.tv_nsec += 250 * 1000 * 1000; /* four sweeps a second */
        if (until.tv_nsec >= 1000 * 1000 * 1000) {
            until.tv_sec++;
            until.tv_nsec -= 1000 * 1000 * 1000;
        }
        pthread_cond_timedwait(&guard->wake, &guard->lock, &until);
        if (!guard->stopping)
            http_guard_sweep(guard);
    }
    pthread_mutex_unlock(&guard->lock);
    return NULL;
}

mitilog_status http_guard_start(unsigned deadline_seconds, http_guard **out, mitilog_error *error)
{
    *out = NULL;
    http_guard *guard = calloc(1, sizeof *guard);
    if (guard == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory starting HTTP");
    guard->deadline_seconds = deadline_seconds;
    pthread_mutex_init(&guard->lock, NULL);
    pthread_condattr_t attributes;
    pthread_condattr_init(&attributes);
    pthread_condattr_setclock(&attributes, CLOCK_MONOTONIC);
    pthread_cond_init(&guard->wake, &attributes);
    pthread_condattr_destroy(&attributes);
    int rc = pthread_create(&guard->thread, NULL, http_guard_watch, guard);
    if (rc != 0) {
        http_guard_stop(guard);
        return mitilog_error_set(error, MITILOG_ERROR_IO,
                                 "HTTP: cannot start the request deadline thread: %s",
                                 strerror(rc));
    }
    guard->thread_started = 1;
    *out = guard;
    return MITILOG_OK;
}

void http_guard_stop(http_guard *guard)
{
    if (guard == NULL)
        return;
    if (guard->thread_started) {
        pthread_mutex_lock(&guard->lock);
        guard->stopping = 1;
        pthread_cond_signal(&guard->wake);
        pthread_mutex_unlock(&guard->lock);
        pthread_join(guard->thread, NULL);
    }
    /* Entries left (none once MHD has stopped) are freed here. */
    while (guard->first != NULL) {
        http_guard_entry *next = guard->first->next;
        free(guard->first);
        guard->first = next;
    }
    pthread_cond_destroy(&guard->wake);
    pthread_mutex_destroy(&guard->lock);
    free(guard);
}

void http_client_address(struct MHD_Connection *connection, char *out, size_t size)
{
    snprintf(out, size, "an unknown address");
    const union MHD_ConnectionInfo *info =
        MHD_get_connection_info(connection, MHD_CONNECTION_INFO_CLIENT_ADDRESS);
    if (info == NULL || info->client_addr == NULL)
        return;
    const struct sockaddr *address = info->client_addr;
    if (address->sa_family == AF_INET)
        inet_ntop(AF_INET, &((const struct sockaddr_in *)(const void *)address)->sin_addr, out,
                  (socklen_t)size);
    else if (address->sa_family == AF_INET6)
        inet_ntop(AF_INET6, &((const struct sockaddr_in6 *)(const void *)address)->sin6_addr, out,
                  (socklen_t)size);
}

void http_guard_notify(void *context, struct MHD_Connection *connection, void **socket_context,
                       enum MHD_ConnectionNotificationCode code)
{
    http_guard *guard = context;
    if (code == MHD_CONNECTION_NOTIFY_STARTED) {
        http_guard_entry *entry = calloc(1, sizeof *entry);
        const union MHD_ConnectionInfo *info =
            MHD_get_connection_info(connection, MHD_CONNECTION_INFO_CONNECTION_FD);
        *socket_context = entry;
        if (entry == NULL || info == NULL) {
            /* Without an entry the connection has only the idle timeout;
             * it is refused rather than left unguarded. */
            free(entry);
            *socket_context = NULL;
            if (info != NULL)
                shutdown(info->connect_fd, SHUT_RDWR);
            return;
        }
        entry->socket = info->connect_fd;
        entry->receiving = 1;
        http_guard_now(&entry->since);
        http_client_address(connection, entry->address, sizeof entry->address);
        pthread_mutex_lock(&guard->lock);
        entry->next = guard->first;
        if (guard->first != NULL)
            guard->first->previous = entry;
        guard->first = entry;
        guard->count++;
        pthread_mutex_unlock(&guard->lock);
    } else if (code == MHD_CONNECTION_NOTIFY_CLOSED) {
        http_guard_entry *entry = *socket_context;
        if (entry == NULL)
            return;
        pthread_mutex_lock(&guard->lock);
        if (entry->previous != NULL)
            entry->previous->next = entry->next;
        else
            guard->first = entry->next;
        if (entry->next != NULL)
            entry->next->previous = entry->previous;
        guard->count--;
        pthread_mutex_unlock(&guard->lock);
        free(entry);
        *socket_context = NULL;
    }
}

/* The connection's entry, or NULL. */
static http_guard_entry *http_guard_entry_of(struct MHD_Connection *connection)
{
    const union MHD_ConnectionInfo *info =
        MHD_get_connection_info(connection, MHD_CONNECTION_INFO_SOCKET_CONTEXT);
    return info != NULL ? info->socket_context : NULL;
}

void http_guard_target(http_guard *guard, struct MHD_Connection *connection, size_t length)
{
    http_guard_entry *entry = http_guard_entry_of(connection);
    if (entry == NULL)
        return;
    pthread_mutex_lock(&guard->lock);
    entry->target_length = length;
    pthread_mutex_unlock(&guard->lock);
}

void http_guard_close(http_guard *guard, struct MHD_Connection *connection, const char *reason)
{
    http_guard_entry *entry = http_guard_entry_of(connection);
    if (entry == NULL)
        return;
    pthread_mutex_lock(&guard->lock);
    if (!entry->cut) {
        entry->cut = 1;
        shutdown(entry->socket, SHUT_RDWR);
        log_warning("http: closed a connection from %s: %s", entry->address, reason);
    }
    pthread_mutex_unlock(&guard->lock);
}

size_t http_guard_received(http_guard *guard, struct MHD_Connection *connection)
{
    http_guard_entry *entry = http_guard_entry_of(connection);
    if (entry == NULL)
        return 0;
    pthread_mutex_lock(&guard->lock);
    entry->receiving = 0;
    size_t length = entry->target_length;
    pthread_mutex_unlock(&guard->lock);
    return length;
}

void http_guard_completed(http_guard *guard, struct MHD_Connection *connection)
{
    http_guard_entry *entry = http_guard_entry_of(connection);
    if (entry == NULL)
        return;
    pthread_mutex_lock(&guard->lock);
    entry->receiving = 1;
    entry->target_length = 0;
    entry->replies++;
    http_guard_now(&entry->since);
    pthread_mutex_unlock(&guard->lock);
}
