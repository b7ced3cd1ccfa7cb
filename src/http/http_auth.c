#include "http/http_auth.h"

#include <crypt.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/random.h>

typedef struct http_user {
    char *name;
    char *hash;
    const char *role; /* "viewer" or "reviewer" (static) */
} http_user;

struct http_auth {
    http_user *users;
    size_t count;
    /* A hash of a random password with the first user's algorithm and
     * cost: checked for unknown user names, so that their replies take as
     * long as a wrong password of a known user. */
    char *dummy_hash;
};

void http_auth_free(http_auth *auth)
{
    if (auth == NULL)
        return;
    for (size_t i = 0; i < auth->count; i++) {
        free(auth->users[i].name);
        free(auth->users[i].hash);
    }
    free(auth->users);
    free(auth->dummy_hash);
    free(auth);
}

/* Makes auth->dummy_hash from 32 random bytes (as hex) hashed with the
 * first user's hash as setting (same algorithm, cost and salt length). */
static mitilog_status http_auth_make_dummy(http_auth *auth, const char *path, mitilog_error *error)
{
    unsigned char random[32];
    char password[2 * sizeof random + 1];
    if (getrandom(random, sizeof random, 0) != (ssize_t)sizeof random)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "cannot read random bytes: %s",
                                 strerror(errno));
    for (size_t i = 0; i < sizeof random; i++)
        snprintf(password + 2 * i, 3, "%02x", random[i]);
    struct crypt_data *data = calloc(1, sizeof *data);
    if (data == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    const char *hash = crypt_r(password, auth->users[0].hash, data);
    mitilog_status status = MITILOG_OK;
    if (hash == NULL || hash[0] == '*')
        status = mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                   "%s: the hash of user %s is not one crypt(3) knows "
                                   "(make it with mitilog passwd)",
                                   path, auth->users[0].name);
    else if ((auth->dummy_hash = strdup(hash)) == NULL)
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    free(data);
    return status;
}

size_t http_auth_user_count(const http_auth *auth) { return auth != NULL ? auth->count : 0; }

/* Adds "name:hash" (line without its newline) to the table. */
static mitilog_status http_auth_add(http_auth *auth, char *line, const char *path, int number,
                                    mitilog_error *error)
{
    char *colon = strchr(line, ':');
    if (colon == NULL || colon == line || colon[1] != '$')
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s:%d: expected user:$crypt-hash",
                                 path, number);
    *colon = '\0';
    /* An optional third field names the role; none: viewer. */
    const char *role = "viewer";
    char *role_colon = strchr(colon + 1, ':');
    if (role_colon != NULL) {
        *role_colon = '\0';
        if (strcmp(role_colon + 1, "reviewer") == 0)
            role = "reviewer";
        else if (strcmp(role_colon + 1, "sender") == 0)
            role = "sender";
        else if (strcmp(role_colon + 1, "viewer") != 0)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "%s:%d: role '%.32s' of user %.64s is none of viewer, "
                                     "reviewer and sender",
                                     path, number, role_colon + 1, line);
    }
    http_user *grown = realloc(auth->users, (auth->count + 1) * sizeof *grown);
    if (grown == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    auth->users = grown;
    http_user *user = &auth->users[auth->count];
    user->name = strdup(line);
    user->hash = strdup(colon + 1);
    user->role = role;
    if (user->name == NULL || user->hash == NULL) {
        free(user->name);
        free(user->hash);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    }
    auth->count++;
    return MITILOG_OK;
}

mitilog_status http_auth_load(const char *path, http_auth **out, mitilog_error *error)
{
    FILE *file = fopen(path, "r");
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", path, strerror(errno));
    http_auth *auth = calloc(1, sizeof *auth);
    mitilog_status status = auth ? MITILOG_OK : MITILOG_ERROR_MEMORY;
    char line[1024];
    int number = 0;
    while (status == MITILOG_OK && fgets(line, sizeof line, file) != NULL) {
        number++;
        line[strcspn(line, "\r\n")] = '\0';
        if (line[0] == '\0' || line[0] == '#')
            continue;
        status = http_auth_add(auth, line, path, number, error);
    }
    fclose(file);
    if (status == MITILOG_OK && auth->count == 0)
        status = mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s: no users", path);
    if (status == MITILOG_OK)
        status = http_auth_make_dummy(auth, path, error);
    if (status != MITILOG_OK) {
        http_auth_free(auth);
        return status;
    }
    *out = auth;
    return MITILOG_OK;
}

/* Compares without an early exit, so timing does not tell how much of a
 * hash matched. */
static int same_text(const char *left, const char *right)
{
    size_t left_length = strlen(left), right_length = strlen(right);
    unsigned char difference = (unsigned char)(left_length != right_length);
    size_t length = left_length < right_length ? left_length : right_length;
    for (size_t i = 0; i < length; i++)
        difference |= (unsigned char)(left[i] ^ right[i]);
    return difference == 0;
}

int http_auth_check(const http_auth *auth, const char *user, const char *password)
{
    if (auth == NULL || user == NULL || password == NULL)
        return 0;
    /* An unknown name is checked against the dummy hash: the same work as
     * a wrong password, so that timing does not tell which names exist. */
    const char *expected = auth->dummy_hash;
    int known = 0;
    for (size_t i = 0; i < auth->count; i++) {
        if (strcmp(auth->users[i].name, user) == 0) {
            expected = auth->users[i].hash;
            known = 1;
            break;
        }
    }
    struct crypt_data *data = calloc(1, sizeof *data); /* ~32 KiB: not on the stack */
    if (data == NULL || expected == NULL) {
        free(data);
        return 0;
    }
    const char *computed = crypt_r(password, expected, data);
    int match = computed != NULL && computed[0] != '*' && same_text(computed, expected);
    free(data);
    return match && known;
}

const char *http_auth_role(const http_auth *auth, const char *user)
{
    if (auth == NULL || user == NULL)
        return NULL;
    for (size_t i = 0; i < auth->count; i++)
        if (strcmp(auth->users[i].name, user) == 0)
            return auth->users[i].role;
    return NULL;
}

mitilog_status http_auth_hash(const char *password, char *out, size_t size, mitilog_error *error)
{
    char salt[CRYPT_GENSALT_OUTPUT_SIZE];
    if (crypt_gensalt_rn("$y$", 0, NULL, 0, salt, sizeof salt) == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "cannot make a salt: %s",
                                 strerror(errno));
    struct crypt_data *data = calloc(1, sizeof *data);
    if (data == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    const char *hash = crypt_r(password, salt, data);
    mitilog_status status = MITILOG_OK;
    if (hash == NULL || hash[0] == '*' || strlen(hash) >= size)
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "crypt failed");
    else
        snprintf(out, size, "%s", hash);
    free(data);
    return status;
}
