#include "config/config_paths.h"

#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

char *config_resolve_path(const char *base, const char *path)
{
    if (path[0] == '/' || base == NULL || path[0] == '\0')
        return strdup(path);
    size_t size = strlen(base) + strlen(path) + 2;
    char *joined = malloc(size);
    if (joined != NULL)
        snprintf(joined, size, "%s/%s", base, path);
    return joined;
}

char *config_current_directory(void)
{
    char buffer[PATH_MAX];
    if (getcwd(buffer, sizeof buffer) == NULL)
        return strdup(".");
    return strdup(buffer);
}

char *config_parent_directory(const char *file_path)
{
    const char *slash = strrchr(file_path, '/');
    if (slash == NULL)
        return config_current_directory();
    size_t length = (size_t)(slash - file_path);
    char *folder = malloc(length + 2);
    if (folder == NULL)
        return NULL;
    if (length == 0) {
        strcpy(folder, "/");
        return folder;
    }
    memcpy(folder, file_path, length);
    folder[length] = '\0';
    if (folder[0] != '/') {
        char *cwd = config_current_directory();
        char *absolute = cwd == NULL ? NULL : config_resolve_path(cwd, folder);
        free(cwd);
        free(folder);
        return absolute;
    }
    return folder;
}
