/*
 * http_static.c - the dashboard's files from web_root: "/" is review.html (the review worklist);
 * no ".." or hidden path parts, and the resolved file must lie inside
 * web_root (no escape through symbolic links). Regular files only.
 */
#include "http/http_internal.h"

#include <fcntl.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

/* Content-Type by file name extension. */
static const char *http_content_type(const char *path)
{
    static const struct {
        const char *extension;
        const char *type;
    } types[] = {
        {".html", "text/html; charset=utf-8"},
        {".css", "text/css; charset=utf-8"},
        {".js", "text/javascript; charset=utf-8"},
        {".svg", "image/svg+xml"},
        {".png", "image/png"},
        {".json", "application/json; charset=utf-8"},
        {".ico", "image/x-icon"},
        {".txt", "text/plain; charset=utf-8"},
    };
    size_t length = strlen(path);
    for (size_t i = 0; i < sizeof types / sizeof types[0]; i++) {
        size_t extension = strlen(types[i].extension);
        if (length > extension && strcmp(path + length - extension, types[i].extension) == 0)
            return types[i].type;
    }
    return "application/octet-stream";
}

/* 1 if url is a path we may look up: absolute, no "..", no part starting
 * with '.', no backslash. */
static int http_is_safe_path(const char *url)
{
    if (url[0] != '/' || strstr(url, "..") != NULL || strstr(url, "/.") != NULL ||
        strchr(url, '\\') != NULL)
        return 0;
    return strlen(url) < 1024;
}

int http_route_static(const http_server *server, const char *url, http_reply *reply)
{
    if (server->web_root == NULL || !http_is_safe_path(url))
        return 0;
    if (strcmp(url, "/") == 0)
        url = "/review.html";
    char path[PATH_MAX + 1024];
    snprintf(path, sizeof path, "%s%s", server->web_root, url);
    char *resolved = realpath(path, NULL);
    if (resolved == NULL)
        return 0;
    size_t root = strlen(server->web_root);
    if (strncmp(resolved, server->web_root, root) != 0 || resolved[root] != '/') {
        free(resolved);
        return 0;
    }
    int fd = open(resolved, O_RDONLY | O_CLOEXEC);
    struct stat info;
    if (fd < 0 || fstat(fd, &info) != 0 || !S_ISREG(info.st_mode)) {
        if (fd >= 0)
            close(fd);
        free(resolved);
        return 0;
    }
    /* MHD closes fd when the response is destroyed. */
    struct MHD_Response *response = MHD_create_response_from_fd64((uint64_t)info.st_size, fd);
    if (response == NULL) {
        close(fd);
        free(resolved);
        return 0;
    }
    MHD_add_response_header(response, "Content-Type", http_content_type(resolved));
    MHD_add_response_header(response, "Cache-Control", "no-cache");
    free(resolved);
    reply->status = MHD_HTTP_OK;
    reply->response = response;
    return 1;
}
