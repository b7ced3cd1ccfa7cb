/*
 * http_throttle.h - failed logins per client address and per user name.
 *
 * From the fifth failure of an address or of a user name on, each failure
 * makes that address or name wait 1, 2, 4 ... up to 300 seconds before its
 * next try (answered 429 without checking the password meanwhile). A success clears the counts
 * of its address and user; counts are forgotten an hour after the last
 * failure. Unknown user names are counted like known ones, so the replies
 * tell nothing about which names exist. At most 4096 addresses and names
 * are remembered; past that the oldest is forgotten first.
 *
 * Ownership: http_throttle_create() gives a table freed by
 * http_throttle_free(). All calls are thread-safe; now is a monotonic
 * clock in seconds (passed in, so that tests choose it).
 */
#ifndef MITILOG_HTTP_THROTTLE_H
#define MITILOG_HTTP_THROTTLE_H

#include <pthread.h>

#include "util/status.h"

typedef struct http_throttle http_throttle;

mitilog_status http_throttle_create(http_throttle **out, mitilog_error *error);
void http_throttle_free(http_throttle *throttle);

/* Whole seconds (rounded up) before address, or user (may be NULL), may
 * try again; 0: now. */
unsigned http_throttle_wait(http_throttle *throttle, const char *address, const char *user,
                            double now);
/* Counts a failed login; gives the failures counted so far of each. */
void http_throttle_failed(http_throttle *throttle, const char *address, const char *user,
                          double now, unsigned *address_failures, unsigned *user_failures);
/* A login succeeded: clears the counts of address and user. */
void http_throttle_succeeded(http_throttle *throttle, const char *address, const char *user);

#endif
