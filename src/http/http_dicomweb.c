/*
 * http_dicomweb.c - DICOMweb STOW-RS: POST /dicomweb/studies (PS3.18
 * section 10.5). The body, multipart/related; type="application/dicom",
 * is kept in a memory file as it arrives (never more than
 * [dicomweb] max_request_megabytes: past that the request is answered 413
 * without reading the rest), then split into its parts by GMime 3; each
 * part goes through ingest_object_receipt(), the same pipeline a C-STORE
 * takes, and the answer (application/dicom+json, PS3.18 section 10.5.3)
 * is sent only after every part has been committed or refused.
 *
 * Who may store: a user of the password file with the role sender (HTTP
 * Basic over HTTPS, as every other request); without a password file
 * STOW-RS is refused.
 *
 * Ownership: an http_stow lives from the first call of the access handler
 * to the request's completion (http_stow_free); it owns its memory file.
 */
#define _GNU_SOURCE /* memfd_create */
#include "http/http_internal.h"

#include <errno.h>
#include <gmime/gmime.h>
#include <netinet/in.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include "ingest/ingest.h"
#include "json/json.h"
#include "util/log.h"

/* Failure reasons of a part, (0008,1197) [std: PS3.18 section 10.5.3,
 * the C-STORE statuses of PS3.4 section B.2.3]. */
enum {
    HTTP_STOW_OUT_OF_RESOURCES = 0xA700,
    HTTP_STOW_MISMATCH = 0xA900,
    HTTP_STOW_CANNOT_UNDERSTAND = 0xC000,
    HTTP_STOW_WARNINGS_SHOWN = 8, /* parts named in the Warning header */
    HTTP_STOW_WARNING_MAX = 1500  /* bytes of that header */
};

struct http_stow {
    int fd;                  /* memory file: a header line, then the body */
    unsigned long long body; /* body bytes received                       */
    int too_large;           /* past the limit: the rest is not read      */
    int answered;            /* a reply was queued before the body ended  */
    int write_failed;        /* errno of a failed write, 0: none           */
    char user[128];
    char address[INET6_ADDRSTRLEN + 32];
};

/* 1 when content_type is multipart/related with type="application/dicom"
 * and a boundary [std: PS3.18 section 10.5.1.2, RFC 2387 section 3]. */
static int http_stow_media_type(const char *content_type)
{
    if (content_type == NULL)
        return 0;
    GMimeContentType *type = g_mime_content_type_parse(NULL, content_type);
    if (type == NULL)
        return 0;
    const char *inner = g_mime_content_type_get_parameter(type, "type");
    const char *boundary = g_mime_content_type_get_parameter(type, "boundary");
    int good = g_mime_content_type_is_type(type, "multipart", "related") && inner != NULL &&
               g_ascii_strcasecmp(inner, "application/dicom") == 0 && boundary != NULL &&
               boundary[0] != '\0';
    g_object_unref(type);
    return good;
}

int http_stow_refused(http_server *server, struct MHD_Connection *connection,
                      const http_identity *identity, http_reply *reply)
{
    if (server->ingest == NULL) {
        *reply = http_error_reply(server, MHD_HTTP_NOT_FOUND,
                                  "DICOMweb STOW-RS is not enabled: set [dicomweb] enabled = yes");
        return 1;
    }
    if (server->auth == NULL) {
        *reply = http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                  "storing objects with STOW-RS needs a login: set [http] "
                                  "password_file (with HTTPS) and send as a user with the role "
                                  "sender (mitilog passwd --role sender USER)");
        return 1;
    }
    if (identity->role == NULL || strcmp(identity->role, "sender") != 0) {
        *reply = http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                  "user %s has the role %s: only a sender may store objects "
                                  "(mitilog passwd --role sender USER)",
                                  identity->user, identity->role != NULL ? identity->role : "none");
        return 1;
    }
    const char *site = MHD_lookup_connection_value(connection, MHD_HEADER_KIND, "Sec-Fetch-Site");
    if (site != NULL && strcmp(site, "same-origin") != 0 && strcmp(site, "none") != 0) {
        *reply = http_error_reply(server, MHD_HTTP_FORBIDDEN,
                                  "refused: the request was started by another site "
                                  "(Sec-Fetch-Site: %s)",
                                  site);
        return 1;
    }
    const char *content_type =
        MHD_lookup_connection_value(connection, MHD_HEADER_KIND, MHD_HTTP_HEADER_CONTENT_TYPE);
    if (!http_stow_media_type(content_type)) {
        *reply = http_error_reply(server, MHD_HTTP_UNSUPPORTED_MEDIA_TYPE,
                                  "STOW-RS takes multipart/related; type=\"application/dicom\" "
                                  "with a boundary (got %s)",
                                  content_type != NULL ? content_type : "no Content-Type");
        return 1;
    }
    const char *length =
        MHD_lookup_connection_value(connection, MHD_HEADER_KIND, MHD_HTTP_HEADER_CONTENT_LENGTH);
    if (length != NULL) {
        char *end = NULL;
        errno = 0;
        unsigned long long declared = strtoull(length, &end, 10);
        if (errno == 0 && end != length && declared > server->stow_max_bytes) {
            *reply = http_stow_too_large(server);
            return 1;
        }
    }
    return 0;
}

http_reply http_stow_too_large(http_server *server)
{
    return http_error_reply(server, MHD_HTTP_CONTENT_TOO_LARGE,
                            "the request is larger than %llu MiB ([dicomweb] "
                            "max_request_megabytes): send fewer objects per request",
                            server->stow_max_bytes / (1024ull * 1024ull));
}

/* Writes all of data to fd; 0 or an errno. */
static int http_stow_write(int fd, const char *data, size_t size)
{
    while (size > 0) {
        ssize_t written = write(fd, data, size);
        if (written < 0) {
            if (errno == EINTR)
                continue;
            return errno;
        }
        data += written;
        size -= (size_t)written;
    }
    return 0;
}

http_stow *http_stow_create(struct MHD_Connection *connection, const http_identity *identity)
{
    http_stow *stow = calloc(1, sizeof *stow);
    if (stow == NULL)
        return NULL;
    stow->fd = memfd_create("mitilog-stow", MFD_CLOEXEC);
    if (stow->fd < 0) {
        free(stow);
        return NULL;
    }
    snprintf(stow->user, sizeof stow->user, "%s", identity->user);
    http_client_address(connection, stow->address, sizeof stow->address);
    /* GMime parses a MIME entity: the body preceded by its own header. */
    const char *content_type =
        MHD_lookup_connection_value(connection, MHD_HEADER_KIND, MHD_HTTP_HEADER_CONTENT_TYPE);
    char header[2048];
    int length = snprintf(header, sizeof header, "Content-Type: %s\r\n\r\n",
                          content_type != NULL ? content_type : "");
    if (length < 0 || (size_t)length >= sizeof header ||
        http_stow_write(stow->fd, header, (size_t)length) != 0) {
        http_stow_free(stow);
        return NULL;
    }
    return stow;
}

int http_stow_feed(http_server *server, http_stow *stow, const char *data, size_t size)
{
    if (stow->too_large || stow->write_failed != 0)
        return !stow->too_large;
    stow->body += size;
    if (stow->body > server->stow_max_bytes) {
        stow->too_large = 1;
        return 0;
    }
    stow->write_failed = http_stow_write(stow->fd, data, size);
    return 1;
}

int http_stow_answered(http_stow *stow) { return stow->answered; }
void http_stow_set_answered(http_stow *stow) { stow->answered = 1; }

void http_stow_free(http_stow *stow)
{
    if (stow == NULL)
        return;
    if (stow->fd >= 0)
        close(stow->fd);
    free(stow);
}

/* One part's result for the answer. */
typedef struct http_stow_result {
    ingest_receipt receipt;
    unsigned failure; /* 0: stored */
    char reason[256];
} http_stow_result;

/* Copies a reason into a Warning header's quoted text: no quotes,
 * backslashes, control characters or bytes outside ASCII [std: RFC 7234
 * section 5.5, quoted-string]. */
static void http_stow_append_warning(char *warnings, size_t size, size_t part, const char *reason)
{
    size_t used = strlen(warnings);
    if (used + 64 >= size)
        return;
    int added = snprintf(warnings + used, size - used,
                         "%s299 mitilog \"part %zu: ", used > 0 ? ", " : "", part);
    if (added < 0)
        return;
    used += (size_t)added;
    for (const unsigned char *byte = (const unsigned char *)reason;
         *byte != '\0' && used + 2 < size; byte++)
        warnings[used++] =
            (*byte < 0x20 || *byte >= 0x7f || *byte == '"' || *byte == '\\') ? '?' : (char)*byte;
    if (used + 2 < size) {
        warnings[used++] = '"';
        warnings[used] = '\0';
    } else {
        warnings[size - 2] = '"';
        warnings[size - 1] = '\0';
    }
}

/* A UI attribute of a DICOM JSON item [std: PS3.18 section F.2.2]. */
static void http_stow_uid(json_writer *writer, const char *tag, const char *uid)
{
    if (uid == NULL || uid[0] == '\0')
        return;
    json_key(writer, tag);
    json_object_begin(writer);
    json_key(writer, "vr");
    json_string(writer, "UI");
    json_key(writer, "Value");
    json_array_begin(writer);
    json_string(writer, uid);
    json_array_end(writer);
    json_object_end(writer);
}

/* The Store Instances Response Module as DICOM JSON [std: PS3.18 section
 * 10.5.3.2 and Annex F.2]: FailedSOPSequence (0008,1198) and
 * ReferencedSOPSequence (0008,1199), attributes in tag order, each
 * sequence only when it has items. RetrieveURL (0008,1190) is left out:
 * mitilog serves no WADO-RS. */
static char *http_stow_document(const http_stow_result *results, size_t count)
{
    json_writer writer;
    json_writer_init(&writer);
    json_object_begin(&writer);
    for (int failed = 1; failed >= 0; failed--) {
        size_t items = 0;
        for (size_t i = 0; i < count; i++)
            items += (results[i].failure != 0) == failed;
        if (items == 0)
            continue;
        json_key(&writer, failed ? "00081198" : "00081199");
        json_object_begin(&writer);
        json_key(&writer, "vr");
        json_string(&writer, "SQ");
        json_key(&writer, "Value");
        json_array_begin(&writer);
        for (size_t i = 0; i < count; i++) {
            if ((results[i].failure != 0) != failed)
                continue;
            json_object_begin(&writer);
            http_stow_uid(&writer, "00081150", results[i].receipt.sop_class_uid);
            http_stow_uid(&writer, "00081155", results[i].receipt.sop_instance_uid);
            if (failed) {
                json_key(&writer, "00081197");
                json_object_begin(&writer);
                json_key(&writer, "vr");
                json_string(&writer, "US");
                json_key(&writer, "Value");
                json_array_begin(&writer);
                json_integer(&writer, results[i].failure);
                json_array_end(&writer);
                json_object_end(&writer);
            }
            json_object_end(&writer);
        }
        json_array_end(&writer);
        json_object_end(&writer);
    }
    json_object_end(&writer);
    char *text = NULL;
    mitilog_error error;
    if (json_writer_take(&writer, &text, &error) != MITILOG_OK)
        text = NULL;
    json_writer_free(&writer);
    return text;
}

/* Writes the decoded content of part into a new memory file; its
 * descriptor, or -1 with reason. */
static int http_stow_part_file(GMimeObject *part, char *reason, size_t size)
{
    if (!GMIME_IS_PART(part)) {
        snprintf(reason, size, "a nested multipart, not a DICOM object");
        return -1;
    }
    GMimeContentType *type = g_mime_object_get_content_type(part);
    if (type == NULL || !g_mime_content_type_is_type(type, "application", "dicom")) {
        char *shown = type != NULL ? g_mime_content_type_get_mime_type(type) : NULL;
        snprintf(reason, size, "its Content-Type is %s, not application/dicom",
                 shown != NULL ? shown : "absent");
        g_free(shown);
        return -1;
    }
    GMimeDataWrapper *content = g_mime_part_get_content(GMIME_PART(part));
    int fd = memfd_create("mitilog-stow-part", MFD_CLOEXEC);
    int copy = fd >= 0 ? dup(fd) : -1;
    if (content == NULL || copy < 0) {
        snprintf(reason, size, "%s",
                 content == NULL ? "the part has no content" : "no memory file for the part");
        if (fd >= 0)
            close(fd);
        return -1;
    }
    GMimeStream *out = g_mime_stream_fs_new(copy); /* owns copy */
    gint64 written = g_mime_data_wrapper_write_to_stream(content, out);
    if (written >= 0)
        written = g_mime_stream_flush(out) == 0 ? written : -1;
    g_object_unref(out);
    if (written < 0) {
        snprintf(reason, size, "its content could not be decoded");
        close(fd);
        return -1;
    }
    return fd;
}

http_reply http_stow_finish(http_server *server, struct MHD_Connection *connection, http_stow *stow)
{
    (void)connection;
    if (stow->too_large)
        return http_stow_too_large(server);
    if (stow->write_failed != 0)
        return http_error_reply(server, MHD_HTTP_SERVICE_UNAVAILABLE,
                                "the request could not be kept in memory (%s): try again later",
                                strerror(stow->write_failed));
    int copy = lseek(stow->fd, 0, SEEK_SET) == 0 ? dup(stow->fd) : -1;
    if (copy < 0)
        return http_error_reply(server, MHD_HTTP_SERVICE_UNAVAILABLE,
                                "the request could not be read back: try again later");
    GMimeStream *stream = g_mime_stream_fs_new(copy); /* owns copy */
    GMimeParser *parser = g_mime_parser_new_with_stream(stream);
    GMimeObject *top = g_mime_parser_construct_part(parser, NULL);
    g_object_unref(parser);
    g_object_unref(stream);
    http_reply reply;
    if (top == NULL || !GMIME_IS_MULTIPART(top) ||
        g_mime_multipart_get_count(GMIME_MULTIPART(top)) <= 0) {
        reply = http_error_reply(server, MHD_HTTP_BAD_REQUEST,
                                 "the body holds no parts: send a multipart/related body whose "
                                 "boundary is the one named in Content-Type");
        if (top != NULL)
            g_object_unref(top);
        return reply;
    }
    GMimeMultipart *multipart = GMIME_MULTIPART(top);
    size_t count = (size_t)g_mime_multipart_get_count(multipart);
    if (count > server->stow_max_parts) {
        g_object_unref(top);
        return http_error_reply(server, MHD_HTTP_CONTENT_TOO_LARGE,
                                "the request holds %zu parts; at most %u are taken ([dicomweb] "
                                "max_parts): send fewer objects per request",
                                count, server->stow_max_parts);
    }
    http_stow_result *results = calloc(count, sizeof *results);
    if (results == NULL) {
        g_object_unref(top);
        return http_error_reply(server, MHD_HTTP_SERVICE_UNAVAILABLE,
                                "out of memory: try again later");
    }
    size_t failures = 0;
    char warnings[HTTP_STOW_WARNING_MAX] = "";
    for (size_t i = 0; i < count; i++) {
        http_stow_result *result = &results[i];
        int fd = http_stow_part_file(g_mime_multipart_get_part(multipart, (int)i), result->reason,
                                     sizeof result->reason);
        if (fd < 0) {
            result->failure = HTTP_STOW_CANNOT_UNDERSTAND;
        } else {
            char path[64], description[INET6_ADDRSTRLEN + 256];
            snprintf(path, sizeof path, "/proc/self/fd/%d", fd);
            snprintf(description, sizeof description, "STOW-RS part %zu from %s (user %s)", i + 1,
                     stow->address, stow->user);
            ingest_source source = {path, 1, "", stow->address, "", "", 0, description};
            mitilog_error error;
            switch (ingest_object_receipt(server->ingest, &source, &result->receipt, &error)) {
            case INGEST_OUTCOME_STORED:
            case INGEST_OUTCOME_REPLACED: break;
            case INGEST_OUTCOME_REJECTED: result->failure = HTTP_STOW_CANNOT_UNDERSTAND; break;
            case INGEST_OUTCOME_MISMATCHED: result->failure = HTTP_STOW_MISMATCH; break;
            case INGEST_OUTCOME_NOT_STORED: result->failure = HTTP_STOW_OUT_OF_RESOURCES; break;
            }
            if (result->failure != 0)
                snprintf(result->reason, sizeof result->reason, "%.255s", error.text);
            close(fd);
        }
        if (result->failure != 0) {
            if (failures < HTTP_STOW_WARNINGS_SHOWN)
                http_stow_append_warning(warnings, sizeof warnings, i + 1, result->reason);
            failures++;
        }
    }
    g_object_unref(top);
    log_info("http: STOW-RS from %s (user %s): %zu of %zu objects stored", stow->address,
             stow->user, count - failures, count);
    /* 200 all stored, 202 some, 409 none [std: PS3.18 section 10.5.3.1]. */
    unsigned status = failures == 0       ? MHD_HTTP_OK
                      : failures == count ? MHD_HTTP_CONFLICT
                                          : MHD_HTTP_ACCEPTED;
    char *document = http_stow_document(results, count);
    free(results);
    if (document == NULL)
        return http_error_reply(server, MHD_HTTP_INTERNAL_SERVER_ERROR,
                                "out of memory writing the answer; %zu of %zu objects were "
                                "stored",
                                count - failures, count);
    reply = http_json_reply(status, document);
    if (reply.response != NULL) {
        MHD_del_response_header(reply.response, "Content-Type", "application/json; charset=utf-8");
        MHD_add_response_header(reply.response, "Content-Type", "application/dicom+json");
        if (warnings[0] != '\0')
            MHD_add_response_header(reply.response, "Warning", warnings);
    }
    return reply;
}
