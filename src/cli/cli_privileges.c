/* cli_privileges.c - see cli_privileges.h. */
#include "cli/cli_privileges.h"

#include <errno.h>
#include <fts.h>
#include <grp.h>
#include <pwd.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

mitilog_status cli_identity_resolve(const char *user, cli_identity *identity, mitilog_error *error)
{
    memset(identity, 0, sizeof *identity);
    if (user == NULL || user[0] == '\0' || geteuid() != 0)
        return MITILOG_OK;
    errno = 0;
    struct passwd *entry = getpwnam(user);
    if (entry == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "[service] user '%.60s' is not a known user; refusing to "
                                 "run as root",
                                 user);
    if (entry->pw_uid == 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "[service] user '%.60s' is root; name an unprivileged user", user);
    identity->change = 1;
    identity->uid = entry->pw_uid;
    identity->gid = entry->pw_gid;
    snprintf(identity->name, sizeof identity->name, "%s", user);
    return MITILOG_OK;
}

mitilog_status cli_identity_give(const cli_identity *identity, const char *path,
                                 mitilog_error *error)
{
    if (!identity->change)
        return MITILOG_OK;
    /* Every entry once (directories before their contents), links not
     * followed, not into other file systems, the working directory kept. */
    char *roots[] = {(char *)path, NULL};
    FTS *walk = fts_open(roots, FTS_PHYSICAL | FTS_NOCHDIR | FTS_XDEV, NULL);
    int failure = walk == NULL ? errno : 0;
    FTSENT *entry;
    errno = 0;
    while (walk != NULL && (entry = fts_read(walk)) != NULL) {
        if (entry->fts_info == FTS_DP)
            continue; /* the same directory, after its contents */
        if (entry->fts_info == FTS_ERR)
            failure = entry->fts_errno;
        else if (lchown(entry->fts_path, identity->uid, identity->gid) != 0)
            failure = errno;
        errno = 0;
    }
    if (walk != NULL && errno != 0 && failure == 0)
        failure = errno; /* fts_read() failed */
    if (walk != NULL)
        fts_close(walk);
    if (failure != 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "cannot give %s to user %s: %s", path,
                                 identity->name, strerror(failure));
    return MITILOG_OK;
}

mitilog_status cli_identity_become(const cli_identity *identity, mitilog_error *error)
{
    if (!identity->change)
        return MITILOG_OK;
    /* Order matters: groups and group while still root, the user last
     * (glibc applies each to every thread of the process). */
    if (initgroups(identity->name, identity->gid) != 0 || setgid(identity->gid) != 0 ||
        setuid(identity->uid) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "cannot become user %s: %s",
                                 identity->name, strerror(errno));
    if (setuid(0) == 0 || geteuid() == 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO,
                                 "root could be regained after "
                                 "switching to %s",
                                 identity->name);
    return MITILOG_OK;
}
