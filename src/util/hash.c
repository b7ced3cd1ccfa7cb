#include "util/hash.h"

#include <errno.h>
#include <openssl/evp.h>
#include <openssl/hmac.h>
#include <stdio.h>
#include <string.h>

static void hex_encode(const unsigned char *digest, unsigned length, char out[HASH_HEX_SIZE])
{
    static const char digits[] = "0123456789abcdef";
    for (unsigned i = 0; i < length && i < 32; i++) {
        out[2 * i] = digits[digest[i] >> 4];
        out[2 * i + 1] = digits[digest[i] & 15];
    }
    out[64] = '\0';
}

mitilog_status hash_text_hex(const char *text, char out[HASH_HEX_SIZE])
{
    unsigned char digest[EVP_MAX_MD_SIZE];
    unsigned length = 0;
    if (EVP_Digest(text, strlen(text), digest, &length, EVP_sha256(), NULL) != 1)
        return MITILOG_ERROR_MEMORY;
    hex_encode(digest, length, out);
    return MITILOG_OK;
}

mitilog_status hash_hmac_hex(const char *key, const char *text, char out[HASH_HEX_SIZE])
{
    unsigned char digest[EVP_MAX_MD_SIZE];
    unsigned length = 0;
    if (HMAC(EVP_sha256(), key, (int)strlen(key), (const unsigned char *)text, strlen(text), digest,
             &length) == NULL)
        return MITILOG_ERROR_MEMORY;
    hex_encode(digest, length, out);
    return MITILOG_OK;
}

mitilog_status hash_file_hex(const char *path, char out[HASH_HEX_SIZE], mitilog_error *error)
{
    FILE *file = fopen(path, "rb");
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%s: %s", path, strerror(errno));
    EVP_MD_CTX *context = EVP_MD_CTX_new();
    mitilog_status status = MITILOG_OK;
    if (context == NULL || EVP_DigestInit_ex(context, EVP_sha256(), NULL) != 1) {
        status = mitilog_error_set(error, MITILOG_ERROR_MEMORY, "cannot start SHA-256");
        goto done;
    }
    unsigned char buffer[65536];
    size_t count;
    while ((count = fread(buffer, 1, sizeof buffer, file)) > 0)
        EVP_DigestUpdate(context, buffer, count);
    if (ferror(file)) {
        status = mitilog_error_set(error, MITILOG_ERROR_IO, "%s: read error", path);
        goto done;
    }
    unsigned char digest[EVP_MAX_MD_SIZE];
    unsigned length = 0;
    EVP_DigestFinal_ex(context, digest, &length);
    hex_encode(digest, length, out);
done:
    EVP_MD_CTX_free(context);
    fclose(file);
    return status;
}

uint64_t hash_fnv1a(const void *bytes, size_t size)
{
    uint64_t hash = 14695981039346656037ULL;
    const unsigned char *byte = bytes;
    for (size_t i = 0; i < size; i++) {
        hash ^= byte[i];
        hash *= 1099511628211ULL;
    }
    return hash;
}
