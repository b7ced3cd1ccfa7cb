/*
 * config_paths.h - path helpers for the configuration: resolving a
 * relative path against a base folder. Every returned string is malloc'ed
 * and freed by the caller; NULL means out of memory.
 */
#ifndef MITILOG_CONFIG_PATHS_H
#define MITILOG_CONFIG_PATHS_H

/* base/path, or a copy of path when it is absolute or base is NULL. */
char *config_resolve_path(const char *base, const char *path);
/* Folder of a file path, made absolute ("." → current directory). */
char *config_parent_directory(const char *file_path);
/* The current working directory. */
char *config_current_directory(void);

#endif
