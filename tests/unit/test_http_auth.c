/* The password file of HTTP Basic authentication. The reference hashes
 * were made by an independent tool, OpenSSL:
 *   openssl passwd -6 -salt abcdefgh 'correct horse'   (SHA-512 crypt)
 *   openssl passwd -5 -salt abcdefgh 'correct horse'   (SHA-256 crypt) */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

#include "http/http_auth.h"

static const char sha512_line[] =
    "nurse:$6$abcdefgh$yIZAF3gQPvtKZO/9qOJKffAKKbtS3ef3qmwyugk4uWVjX8YZf/GV3A8SkFxEPY0T56CcilGrHKLf"
    "fBsp6dLMG.\n";
static const char sha256_line[] =
    "physicist:$5$abcdefgh$ruMep1ijHnJPZbETDNiumskxcX3kN4lzZd5VlsqE7eB\n";

static char *write_file(const char *text)
{
    static char path[] = "/tmp/mitilog-auth-XXXXXX";
    strcpy(path, "/tmp/mitilog-auth-XXXXXX");
    int descriptor = mkstemp(path);
    assert_true(descriptor >= 0);
    assert_int_equal(write(descriptor, text, strlen(text)), (ssize_t)strlen(text));
    close(descriptor);
    return path;
}

static void openssl_hashes_verify(void **state)
{
    (void)state;
    char text[512];
    snprintf(text, sizeof text, "# users of the dashboard\n\n%s%s", sha512_line, sha256_line);
    char *path = write_file(text);
    http_auth *auth = NULL;
    mitilog_error error;
    assert_int_equal(http_auth_load(path, &auth, &error), MITILOG_OK);
    assert_true(http_auth_check(auth, "nurse", "correct horse"));
    assert_true(http_auth_check(auth, "physicist", "correct horse"));
    assert_false(http_auth_check(auth, "nurse", "correct horse "));
    assert_false(http_auth_check(auth, "nurse", ""));
    assert_false(http_auth_check(auth, "nobody", "correct horse"));
    assert_false(http_auth_check(auth, "nurse", NULL));
    http_auth_free(auth);
    unlink(path);
}

static void own_hash_round_trip(void **state)
{
    (void)state;
    char hash[256], line[400];
    mitilog_error error;
    assert_int_equal(http_auth_hash("battery staple", hash, sizeof hash, &error), MITILOG_OK);
    assert_memory_equal(hash, "$y$", 3); /* yescrypt prefix (libxcrypt) */
    snprintf(line, sizeof line, "lead:%s\n", hash);
    char *path = write_file(line);
    http_auth *auth = NULL;
    assert_int_equal(http_auth_load(path, &auth, &error), MITILOG_OK);
    assert_true(http_auth_check(auth, "lead", "battery staple"));
    assert_false(http_auth_check(auth, "lead", "battery stable"));
    http_auth_free(auth);
    unlink(path);
}

static void bad_files(void **state)
{
    (void)state;
    http_auth *auth = NULL;
    mitilog_error error;
    char *path = write_file("nurse plaintext\n");
    assert_int_equal(http_auth_load(path, &auth, &error), MITILOG_ERROR_INVALID);
    assert_non_null(strstr(error.text, ":1: expected user:$crypt-hash"));
    unlink(path);
    path = write_file("# nobody\n");
    assert_int_equal(http_auth_load(path, &auth, &error), MITILOG_ERROR_INVALID);
    unlink(path);
    assert_int_equal(http_auth_load("/nonexistent/passwords", &auth, &error), MITILOG_ERROR_IO);
}

static void roles(void **state)
{
    /* The role field (common practice, no source): absent -> viewer;
     * "reviewer" may record reviews; anything else refuses the file. The
     * hashes are the OpenSSL references above, the role appended. */
    (void)state;
    char text[512];
    char nurse[256], physicist[256];
    snprintf(nurse, sizeof nurse, "%.*s:reviewer\n", (int)strlen(sha512_line) - 1, sha512_line);
    snprintf(physicist, sizeof physicist, "%.*s:viewer\n", (int)strlen(sha256_line) - 1,
             sha256_line);
    snprintf(text, sizeof text, "%s%s", nurse, physicist);
    char *path = write_file(text);
    http_auth *auth = NULL;
    mitilog_error error;
    assert_int_equal(http_auth_load(path, &auth, &error), MITILOG_OK);
    assert_true(http_auth_check(auth, "nurse", "correct horse"));
    assert_string_equal(http_auth_role(auth, "nurse"), "reviewer");
    assert_true(http_auth_check(auth, "physicist", "correct horse"));
    assert_string_equal(http_auth_role(auth, "physicist"), "viewer");
    assert_null(http_auth_role(auth, "nobody"));
    http_auth_free(auth);
    unlink(path);
    path = write_file(sha512_line);
    assert_int_equal(http_auth_load(path, &auth, &error), MITILOG_OK);
    assert_string_equal(http_auth_role(auth, "nurse"), "viewer");
    http_auth_free(auth);
    unlink(path);
    snprintf(text, sizeof text, "%.*s:admin\n", (int)strlen(sha512_line) - 1, sha512_line);
    path = write_file(text);
    assert_int_equal(http_auth_load(path, &auth, &error), MITILOG_ERROR_INVALID);
    assert_non_null(strstr(error.text, "none of viewer, reviewer and sender"));
    unlink(path);
    /* A machine client's role (common practice, no source). */
    snprintf(text, sizeof text, "%.*s:sender\n", (int)strlen(sha512_line) - 1, sha512_line);
    path = write_file(text);
    assert_int_equal(http_auth_load(path, &auth, &error), MITILOG_OK);
    assert_string_equal(http_auth_role(auth, "nurse"), "sender");
    http_auth_free(auth);
    unlink(path);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(openssl_hashes_verify),
        cmocka_unit_test(own_hash_round_trip),
        cmocka_unit_test(bad_files),
        cmocka_unit_test(roles),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
