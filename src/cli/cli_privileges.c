/* cli_privileges.c - see cli_privileges.h. */
#define _XOPEN_SOURCE 700 /* nftw() */
#include "cli/cli_privileges.h"

#include <errno.h>
#include <ftw.h>
#include <grp.h>
#include <pwd.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

mitilog_status cli_identity_resolve(const char *user, cli_identity *identity,
                                    mitilog_error *error)
{
    memset(identity, 0, sizeof *identity);
    if (user == NULL || user[0] == '\0' || geteuid() != 0)
        return MITILOG_OK;
    errno = 0;
    struct passwd *entry = getpwnam(user);
    if (entry == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "[service] user '%.60s' is not a known user; refusing to "
                                 "run as root", user);
    if (entry->pw_uid == 0)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "[service] user '%.60s' is root; name an unprivileged user",
                                 user);
    identity->change = 1;
    identity->uid = entry->pw_uid;
    identity->gid = entry->pw_gid;
    snprintf(identity->name, sizeof identity->name, "%s", user);
    return MITILOG_OK;
}

/* nftw() has no user argument: the one walk in flight, serve's start. */
static const cli_identity *give_identity;
static int give_errno;

static int give_one(const char *path, const struct stat *info, int type, struct FTW *walk)
{
    (void)info;
    (void)type;
    (void)walk;
    if (lchown(path, give_identity->uid, give_identity->gid) != 0)
        give_errno = errno;
    return 0;
}

mitilog_status cli_identity_give(const cli_identity *identity, const char *path,
                                 mitilog_error *error)
{
    if (!identity->change)
        return MITILOG_OK;
    give_identity = identity;
    give_errno = 0;
    if (nftw(path, give_one, 16, FTW_PHYS | FTW_MOUNT) != 0 || give_errno != 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "cannot give %s to user %s: %s", path,
                                 identity->name, strerror(give_errno ? give_errno : errno));
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
        return mitilog_error_set(error, MITILOG_ERROR_IO, "root could be regained after "
                                 "switching to %s", identity->name);
    return MITILOG_OK;
}
