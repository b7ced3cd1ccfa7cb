/*
 * cli_privileges.h - the privilege drop of `serve` ([service] user): a
 * daemon started as root binds its ports, then runs as that user. The
 * data folder is handed to the user first, so files created later (spool,
 * quarantine, copies, the database's -wal/-shm) stay writable.
 */
#ifndef MITILOG_CLI_PRIVILEGES_H
#define MITILOG_CLI_PRIVILEGES_H

#include <sys/types.h>

#include "util/status.h"

typedef struct cli_identity {
    int change; /* 1: started as root with a user to become */
    uid_t uid;
    gid_t gid;
    char name[64];
} cli_identity;

/* Decides what to become. user "" (or not root): change = 0. Root with
 * an unknown user: an error (the daemon must not stay root by mistake). */
mitilog_status cli_identity_resolve(const char *user, cli_identity *identity, mitilog_error *error);

/* chown -R (not following symbolic links) of path to the identity. */
mitilog_status cli_identity_give(const cli_identity *identity, const char *path,
                                 mitilog_error *error);

/* initgroups, setgid, setuid; then checks root cannot be regained. */
mitilog_status cli_identity_become(const cli_identity *identity, mitilog_error *error);

#endif
