/*
 * http_auth.h - HTTP Basic authentication against a password file, for
 * the API and dashboard when they are reachable beyond this machine (and
 * then only over HTTPS).
 *
 * The file holds one "user:hash" or "user:hash:role" line per user; the
 * hash is a crypt(3) string from libxcrypt (yescrypt "$y$...", or SHA-512
 * "$6$..."), made with `mitilog passwd [--role ROLE] USER` or
 * `mkpasswd -m yescrypt`. Roles: "viewer" (reads; the default when the
 * field is absent), "reviewer" (reads, and records reviews of findings)
 * and "sender" (a machine client: stores objects with DICOMweb STOW-RS
 * and reads nothing). Lines starting with '#' and blank lines are ignored.
 *
 * Ownership: http_auth_load() gives a table freed by http_auth_free().
 * http_auth_check() is thread-safe.
 */
#ifndef MITILOG_HTTP_AUTH_H
#define MITILOG_HTTP_AUTH_H

#include <stddef.h>

#include "util/status.h"

typedef struct http_auth http_auth;

mitilog_status http_auth_load(const char *path, http_auth **out, mitilog_error *error);
void http_auth_free(http_auth *auth);

/* 1 when user and password match a line of the file, 0 otherwise. An
 * unknown user costs the same hash computation as a known one (against a
 * hash of a random password made at load with the first user's setting).
 * Throttling of failures is http_throttle.h's job. */
int http_auth_check(const http_auth *auth, const char *user, const char *password);
/* The role of a user of the file ("viewer", "reviewer" or "sender", static), NULL
 * for an unknown name. Ask only after http_auth_check() accepted. */
const char *http_auth_role(const http_auth *auth, const char *user);
/* Users in the file. */
size_t http_auth_user_count(const http_auth *auth);

/* A new crypt(3) hash of password with a fresh random salt (yescrypt);
 * out must hold 256 bytes. */
mitilog_status http_auth_hash(const char *password, char *out, size_t size, mitilog_error *error);

#endif
