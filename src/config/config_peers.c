#include "config/config_peers.h"

#include <arpa/inet.h>
#include <stdlib.h>
#include <string.h>

/* Copies text[0..length) without surrounding spaces into out. */
static size_t trim_into(const char *text, size_t length, char *out, size_t size)
{
    while (length > 0 && text[0] == ' ') {
        text++;
        length--;
    }
    while (length > 0 && text[length - 1] == ' ')
        length--;
    if (length >= size)
        return (size_t)-1;
    memcpy(out, text, length);
    out[length] = '\0';
    return length;
}

mitilog_status config_peers_parse(const char *list, config_peer **peers, size_t *count,
                                  mitilog_error *error)
{
    *peers = NULL;
    *count = 0;
    size_t capacity = 1;
    for (const char *c = list; *c; c++)
        capacity += (*c == ',');
    config_peer *parsed = calloc(capacity, sizeof *parsed);
    if (parsed == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory");
    size_t used = 0;
    for (const char *entry = list; *entry;) {
        const char *comma = strchr(entry, ',');
        size_t length = comma ? (size_t)(comma - entry) : strlen(entry);
        char item[128];
        size_t item_length = trim_into(entry, length, item, sizeof item);
        if (item_length == (size_t)-1) {
            free(parsed);
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "entry too long");
        }
        if (item_length > 0) {
            char *at = strchr(item, '@');
            const char *address = "";
            if (at != NULL) {
                *at = '\0';
                address = at + 1;
            }
            config_peer *peer = &parsed[used];
            struct in_addr probe;
            if (trim_into(item, strlen(item), peer->ae_title, sizeof peer->ae_title) == 0 ||
                strlen(peer->ae_title) > 16 || strchr(peer->ae_title, '\\') != NULL) {
                free(parsed);
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "'%s' is not an AE title (1-16 characters)", item);
            }
            if (trim_into(address, strlen(address), peer->address, sizeof peer->address) ==
                    (size_t)-1 ||
                (peer->address[0] != '\0' && inet_pton(AF_INET, peer->address, &probe) != 1)) {
                free(parsed);
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "'%s' is not an IPv4 address", address);
            }
            used++;
        }
        entry = comma ? comma + 1 : entry + length;
    }
    if (used == 0) {
        free(parsed);
        return MITILOG_OK;
    }
    *peers = parsed;
    *count = used;
    return MITILOG_OK;
}
