/*
 * notify.c - the sender thread of notifications (see notify.h): reads
 * the due rows of the outbox once a second, delivers each (webhook post
 * with libcurl, or a datagram to the syslog socket) and records the
 * outcome.
 */
#include "notify/notify.h"

#include <curl/curl.h>
#include <errno.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <time.h>
#include <unistd.h>

#include "json/json.h"
#include "util/files.h"
#include "util/hash.h"
#include "util/log.h"

enum {
    NOTIFY_BATCH = 8,         /* rows taken per pass */
    NOTIFY_POLL_SECONDS = 1,  /* between passes when idle */
    NOTIFY_LEASE_SECONDS = 10 /* a taken batch's margin beyond its timeouts */
};

struct notify {
    store *store;
    char *webhook_url, *webhook_ca, *syslog_socket, *dashboard_url, *site;
    int syslog_facility; /* facility code, PS: RFC 5424 section 6.2.1 */
    unsigned timeout_seconds, retry_initial, retry_max, max_attempts;
    pthread_t thread;
    int started;
    int curl_started; /* curl_global_init() was called */
    pthread_mutex_t lock;
    pthread_cond_t wake;
    int stopping; /* under lock */
};

/* Facility codes [std: RFC 5424 section 6.2.1, table 1]. */
static int notify_facility_code(const char *name)
{
    if (strcmp(name, "user") == 0)
        return 1;
    if (strncmp(name, "local", 5) == 0 && name[5] >= '0' && name[5] <= '7' && name[6] == '\0')
        return 16 + (name[5] - '0');
    return 3; /* daemon */
}

unsigned notify_backoff_seconds(unsigned initial, unsigned maximum, long attempts)
{
    unsigned long long wait = initial;
    for (long i = 1; i < attempts && wait < maximum; i++)
        wait *= 2;
    return wait > maximum ? maximum : (unsigned)wait;
}

/* The study key as the API gives it: first 8 hex digits of SHA-256 of
 * the UID (docs/api.md, /api/v1/stats). */
static void notify_study_key(const char *uid, char out[9])
{
    char hex[HASH_HEX_SIZE];
    out[0] = '\0';
    if (uid != NULL && hash_text_hex(uid, hex) == MITILOG_OK)
        snprintf(out, 9, "%.8s", hex);
}

/* The exam page's link, "" when there is no dashboard URL or study. */
static void notify_link(const char *dashboard_url, const char *uid, char *out, size_t size)
{
    out[0] = '\0';
    if (dashboard_url == NULL || dashboard_url[0] == '\0' || uid == NULL)
        return;
    size_t length = strlen(dashboard_url);
    /* A UID is digits and dots (PS3.5 9.1): nothing to escape. */
    snprintf(out, size, "%.*s/exam.html?study=%s",
             (int)(length > 0 && dashboard_url[length - 1] == '/' ? length - 1 : length),
             dashboard_url, uid);
}

char *notify_document(const store_notification *row, const char *site, const char *dashboard_url)
{
    char key[9], link[1024];
    notify_study_key(row->study_instance_uid, key);
    notify_link(dashboard_url, row->study_instance_uid, link, sizeof link);
    json_writer writer;
    json_writer_init(&writer);
    json_object_begin(&writer);
    json_key(&writer, "event");
    json_string(&writer, "finding");
    json_key(&writer, "severity");
    json_string(&writer, row->severity);
    json_key(&writer, "rule");
    json_string(&writer, row->rule_id);
    json_key(&writer, "quantity");
    json_string(&writer, row->quantity);
    json_key(&writer, "value");
    json_number(&writer, row->has_value, row->measured_value);
    json_key(&writer, "unit");
    json_string(&writer, row->unit);
    json_key(&writer, "limit");
    json_number(&writer, row->has_limit, row->limit_value);
    json_key(&writer, "study_key");
    json_string(&writer, key[0] != '\0' ? key : NULL);
    json_key(&writer, "study_instance_uid");
    json_string(&writer, row->study_instance_uid);
    json_key(&writer, "accession_number");
    json_string(&writer, row->accession_number);
    json_key(&writer, "room");
    json_string(&writer, row->room);
    json_key(&writer, "preset");
    json_string(&writer, row->preset);
    json_key(&writer, "site");
    json_string(&writer, site != NULL && site[0] != '\0' ? site : NULL);
    json_key(&writer, "period");
    json_string(&writer, row->period);
    json_key(&writer, "started_at");
    json_string(&writer, row->started_at);
    json_key(&writer, "recorded_at");
    json_string(&writer, row->created_at);
    json_key(&writer, "link");
    json_string(&writer, link[0] != '\0' ? link : NULL);
    json_object_end(&writer);
    char *text = NULL;
    mitilog_error error;
    if (json_writer_take(&writer, &text, &error) != MITILOG_OK)
        text = NULL;
    json_writer_free(&writer);
    return text;
}

/* Appends " name=value" to out; value quoted when it holds a space or a
 * quote; control characters and bytes outside ASCII as '?'. */
static void notify_append_field(char *out, size_t size, const char *name, const char *value)
{
    if (value == NULL || value[0] == '\0')
        return;
    size_t used = strlen(out);
    int quoted = strpbrk(value, " \"=") != NULL;
    int written = snprintf(out + used, size - used, " %s=%s", name, quoted ? "\"" : "");
    if (written < 0 || (size_t)written >= size - used)
        return;
    used += (size_t)written;
    for (const unsigned char *byte = (const unsigned char *)value; *byte != '\0' && used + 2 < size;
         byte++)
        out[used++] =
            (*byte < 0x20 || *byte >= 0x7f || *byte == '"' || *byte == '\\') ? '?' : (char)*byte;
    if (quoted && used + 1 < size)
        out[used++] = '"';
    out[used] = '\0';
}

void notify_syslog_text(const store_notification *row, const char *site, const char *dashboard_url,
                        char *out, size_t size)
{
    char key[9], link[1024], value[64] = "", limit[64] = "";
    notify_study_key(row->study_instance_uid, key);
    notify_link(dashboard_url, row->study_instance_uid, link, sizeof link);
    if (row->has_value)
        snprintf(value, sizeof value, "%g", row->measured_value);
    if (row->has_limit)
        snprintf(limit, sizeof limit, "%g", row->limit_value);
    snprintf(out, size, "ALARA %s: rule %s", row->severity, row->rule_id);
    notify_append_field(out, size, "quantity", row->quantity);
    notify_append_field(out, size, "value", value);
    notify_append_field(out, size, "unit", row->unit);
    notify_append_field(out, size, "limit", limit);
    notify_append_field(out, size, "study_key", key);
    notify_append_field(out, size, "accession", row->accession_number);
    notify_append_field(out, size, "room", row->room);
    notify_append_field(out, size, "preset", row->preset);
    notify_append_field(out, size, "site", site);
    notify_append_field(out, size, "period", row->period);
    notify_append_field(out, size, "started_at", row->started_at);
    notify_append_field(out, size, "link", link);
}

/* libcurl's write callback: the webhook's answer is not kept. */
static size_t notify_discard(char *data, size_t size, size_t count, void *context)
{
    (void)data;
    (void)context;
    return size * count;
}

/* Posts body; MITILOG_OK on a 2xx answer, else the reason in error. */
static mitilog_status notify_post(const notify *n, const char *body, mitilog_error *error)
{
    CURL *curl = curl_easy_init();
    if (curl == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "libcurl: no handle");
    struct curl_slist *headers = curl_slist_append(NULL, "Content-Type: application/json");
    char agent[64];
    snprintf(agent, sizeof agent, "mitilog/%s", MITILOG_VERSION);
    char message[CURL_ERROR_SIZE] = "";
    curl_easy_setopt(curl, CURLOPT_URL, n->webhook_url);
    curl_easy_setopt(curl, CURLOPT_PROTOCOLS_STR, "http,https");
    curl_easy_setopt(curl, CURLOPT_HTTPHEADER, headers);
    curl_easy_setopt(curl, CURLOPT_USERAGENT, agent);
    curl_easy_setopt(curl, CURLOPT_POSTFIELDS, body);
    curl_easy_setopt(curl, CURLOPT_POSTFIELDSIZE, (long)strlen(body));
    curl_easy_setopt(curl, CURLOPT_TIMEOUT, (long)n->timeout_seconds);
    curl_easy_setopt(curl, CURLOPT_CONNECTTIMEOUT, (long)n->timeout_seconds);
    curl_easy_setopt(curl, CURLOPT_NOSIGNAL, 1L); /* a thread of a daemon */
    curl_easy_setopt(curl, CURLOPT_SSL_VERIFYPEER, 1L);
    curl_easy_setopt(curl, CURLOPT_SSL_VERIFYHOST, 2L);
    curl_easy_setopt(curl, CURLOPT_FOLLOWLOCATION, 0L);
    curl_easy_setopt(curl, CURLOPT_WRITEFUNCTION, notify_discard);
    curl_easy_setopt(curl, CURLOPT_ERRORBUFFER, message);
    if (n->webhook_ca != NULL)
        curl_easy_setopt(curl, CURLOPT_CAINFO, n->webhook_ca);
    CURLcode code = headers != NULL ? curl_easy_perform(curl) : CURLE_OUT_OF_MEMORY;
    long answer = 0;
    curl_easy_getinfo(curl, CURLINFO_RESPONSE_CODE, &answer);
    mitilog_status status = MITILOG_OK;
    if (code != CURLE_OK)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "webhook: %s",
                                   message[0] != '\0' ? message : curl_easy_strerror(code));
    else if (answer < 200 || answer > 299)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "webhook answered HTTP %ld", answer);
    curl_slist_free_all(headers);
    curl_easy_cleanup(curl);
    return status;
}

/* Severity of the line [std: RFC 5424 section 6.2.1, table 2]: warning
 * for a violation, notice for a warning, informational otherwise. */
static int notify_syslog_severity(const char *severity)
{
    int rank = store_notifications_rank(severity);
    return rank == 3 ? 4 : rank == 2 ? 5 : 6;
}

/* One datagram to the syslog socket in the format of the C library's
 * syslog(3) (RFC 3164 section 4.1: <PRI>TIMESTAMP TAG: MSG). */
static mitilog_status notify_syslog(const notify *n, const store_notification *row,
                                    mitilog_error *error)
{
    char text[1536], line[1800], stamp[32];
    notify_syslog_text(row, n->site, n->dashboard_url, text, sizeof text);
    time_t now = time(NULL);
    struct tm local;
    localtime_r(&now, &local);
    strftime(stamp, sizeof stamp, "%b %e %H:%M:%S", &local);
    int length = snprintf(line, sizeof line, "<%d>%s mitilog[%ld]: %s",
                          n->syslog_facility * 8 + notify_syslog_severity(row->severity), stamp,
                          (long)getpid(), text);
    if (length < 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "syslog: cannot format the line");
    size_t size = (size_t)length < sizeof line ? (size_t)length : sizeof line - 1;
    struct sockaddr_un address;
    memset(&address, 0, sizeof address);
    address.sun_family = AF_UNIX;
    if (strlen(n->syslog_socket) >= sizeof address.sun_path)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "syslog: socket path too long: %s",
                                 n->syslog_socket);
    memcpy(address.sun_path, n->syslog_socket, strlen(n->syslog_socket) + 1);
    int fd = socket(AF_UNIX, SOCK_DGRAM | SOCK_CLOEXEC, 0);
    if (fd < 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "syslog: socket: %s", strerror(errno));
    mitilog_status status = MITILOG_OK;
    if (sendto(fd, line, size, 0, (const struct sockaddr *)&address, sizeof address) < 0)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "syslog: %s: %s", n->syslog_socket,
                                   strerror(errno));
    close(fd);
    return status;
}

/* ISO 8601 UTC of now + seconds, as files_utc_now() writes times. */
static void notify_time_after(unsigned seconds, char *out, size_t size)
{
    time_t when = time(NULL) + (time_t)seconds;
    struct tm utc;
    gmtime_r(&when, &utc);
    strftime(out, size, "%Y-%m-%dT%H:%M:%S.000Z", &utc);
}

/* Delivers one row and records the outcome. */
static void notify_deliver(notify *n, const store_notification *row)
{
    mitilog_error error;
    mitilog_status status;
    if (strcmp(row->channel, "webhook") == 0 && n->webhook_url != NULL) {
        char *body = notify_document(row, n->site, n->dashboard_url);
        status = body != NULL ? notify_post(n, body, &error)
                              : mitilog_error_set(&error, MITILOG_ERROR_MEMORY, "out of memory");
        free(body);
    } else if (strcmp(row->channel, "syslog") == 0 && n->syslog_socket != NULL) {
        status = notify_syslog(n, row, &error);
    } else {
        status = mitilog_error_set(&error, MITILOG_ERROR_INVALID,
                                   "the %s channel is no longer configured", row->channel);
    }
    char now[32], next[32];
    files_utc_now(now, sizeof now);
    long attempts = row->attempts + 1;
    const char *state = "delivered";
    if (status != MITILOG_OK) {
        state = attempts >= (long)n->max_attempts ? "failed" : "pending";
        unsigned wait = notify_backoff_seconds(n->retry_initial, n->retry_max, attempts);
        notify_time_after(wait, next, sizeof next);
        if (strcmp(state, "failed") == 0)
            log_warning("notification %lld (%s, rule %s): given up after %ld attempts: %s", row->id,
                        row->channel, row->rule_id, attempts, error.text);
        else
            log_warning("notification %lld (%s, rule %s): attempt %ld failed, next in %u s: %s",
                        row->id, row->channel, row->rule_id, attempts, wait, error.text);
    } else {
        snprintf(next, sizeof next, "%s", now);
        log_info("notification %lld (%s, rule %s, %s) delivered", row->id, row->channel,
                 row->rule_id, row->severity);
    }
    mitilog_error record_error;
    if (store_notifications_record(n->store, row->id, state, now, next,
                                   status != MITILOG_OK ? error.text : NULL,
                                   &record_error) != MITILOG_OK)
        log_warning("notification %lld: outcome not recorded (it will be sent again): %s", row->id,
                    record_error.text);
}

static int notify_stopping(notify *n)
{
    pthread_mutex_lock(&n->lock);
    int stopping = n->stopping;
    pthread_mutex_unlock(&n->lock);
    return stopping;
}

static void *notify_run(void *context)
{
    notify *n = context;
    while (!notify_stopping(n)) {
        char now[32];
        files_utc_now(now, sizeof now);
        store_notification *rows = NULL;
        size_t count = 0;
        mitilog_error error;
        /* The lease outlasts the batch's deliveries, each bounded by
         * timeout_seconds (CURLOPT_TIMEOUT covers the whole transfer,
         * connecting included). */
        char lease_until[32];
        notify_time_after(NOTIFY_LEASE_SECONDS + n->timeout_seconds * NOTIFY_BATCH, lease_until,
                          sizeof lease_until);
        if (store_notifications_take(n->store, now, lease_until, NOTIFY_BATCH, &rows, &count,
                                     &error) != MITILOG_OK)
            log_warning("notifications: cannot read the outbox (will try again): %s", error.text);
        for (size_t i = 0; i < count && !notify_stopping(n); i++)
            notify_deliver(n, &rows[i]);
        store_notifications_free(rows, count);
        if (count == NOTIFY_BATCH)
            continue; /* more may be due */
        struct timespec until;
        clock_gettime(CLOCK_REALTIME, &until);
        until.tv_sec += NOTIFY_POLL_SECONDS;
        pthread_mutex_lock(&n->lock);
        if (!n->stopping)
            pthread_cond_timedwait(&n->wake, &n->lock, &until);
        pthread_mutex_unlock(&n->lock);
    }
    return NULL;
}

static char *notify_copy(const char *text)
{
    return text != NULL && text[0] != '\0' ? strdup(text) : NULL;
}

void notify_stop(notify *n)
{
    if (n == NULL)
        return;
    if (n->started) {
        pthread_mutex_lock(&n->lock);
        n->stopping = 1;
        pthread_cond_signal(&n->wake);
        pthread_mutex_unlock(&n->lock);
        pthread_join(n->thread, NULL);
    }
    pthread_cond_destroy(&n->wake);
    pthread_mutex_destroy(&n->lock);
    free(n->webhook_url);
    free(n->webhook_ca);
    free(n->syslog_socket);
    free(n->dashboard_url);
    free(n->site);
    if (n->curl_started)
        curl_global_cleanup();
    free(n);
}

mitilog_status notify_start(const config *config, store *st, notify **out, mitilog_error *error)
{
    *out = NULL;
    int webhook = config->notify_webhook_url[0] != '\0';
    int syslog = strcmp(config->notify_syslog, "yes") == 0;
    store_notifications_configure(st, store_notifications_rank(config->notify_severity), webhook,
                                  syslog);
    if (!webhook && !syslog)
        return MITILOG_OK;
    notify *n = calloc(1, sizeof *n);
    if (n == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "notifications: out of memory");
    pthread_mutex_init(&n->lock, NULL);
    pthread_cond_init(&n->wake, NULL);
    if (webhook) {
        if (curl_global_init(CURL_GLOBAL_DEFAULT) != CURLE_OK) {
            notify_stop(n);
            return mitilog_error_set(error, MITILOG_ERROR_IO,
                                     "notifications: libcurl did not start");
        }
        n->curl_started = 1;
    }
    n->store = st;
    n->webhook_url = webhook ? notify_copy(config->notify_webhook_url) : NULL;
    n->webhook_ca = notify_copy(config->notify_webhook_ca);
    n->syslog_socket = syslog ? notify_copy(config->notify_syslog_socket) : NULL;
    n->dashboard_url = notify_copy(config->notify_dashboard_url);
    n->site = notify_copy(config->site_institution);
    n->syslog_facility = notify_facility_code(config->notify_syslog_facility);
    n->timeout_seconds = config->notify_timeout_seconds;
    n->retry_initial = config->notify_retry_initial_seconds;
    n->retry_max = config->notify_retry_max_seconds;
    n->max_attempts = config->notify_max_attempts;
    if ((webhook && n->webhook_url == NULL) || (syslog && n->syslog_socket == NULL)) {
        notify_stop(n);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "notifications: out of memory");
    }
    if (pthread_create(&n->thread, NULL, notify_run, n) != 0) {
        notify_stop(n);
        return mitilog_error_set(error, MITILOG_ERROR_IO,
                                 "notifications: cannot start the sender thread");
    }
    n->started = 1;
    /* The URL's path may hold the webhook's secret: only its scheme and
     * host are logged. */
    const char *host = webhook ? strstr(config->notify_webhook_url, "://") : NULL;
    int shown = host != NULL
                    ? (int)(host + 3 - config->notify_webhook_url) + (int)strcspn(host + 3, "/?#")
                    : 0;
    log_info("notifications: findings of severity %s and above%s%.*s%s%s%s",
             config->notify_severity, webhook ? " posted to the webhook at " : "", shown,
             webhook ? config->notify_webhook_url : "", webhook ? "/..." : "",
             syslog ? "; syslog lines to " : "", syslog ? config->notify_syslog_socket : "");
    *out = n;
    return MITILOG_OK;
}
