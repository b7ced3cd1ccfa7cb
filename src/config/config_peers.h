/*
 * config_peers.h - the calling-AE allowlist of [dicom]
 * allowed_calling_ae_titles: "AE[@IPv4], AE[@IPv4], ...".
 * config_peers_parse() gives an array freed by the caller with free().
 */
#ifndef MITILOG_CONFIG_PEERS_H
#define MITILOG_CONFIG_PEERS_H

#include <stddef.h>

#include "util/status.h"

typedef struct config_peer {
    char ae_title[17];
    char address[16]; /* "" = any source address */
} config_peer;

/* An empty list gives *count == 0 and *peers == NULL (anyone allowed). */
mitilog_status config_peers_parse(const char *list, config_peer **peers, size_t *count,
                                  mitilog_error *error);

#endif
