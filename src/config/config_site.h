/*
 * config_site.h - the site file (conf/site.ini, named by [site] rules in
 * mitilog.ini): exam types and their regexes, room maps, shifts, age
 * group bounds, extraction switches and the SR code table, parsed with
 * inih into ext_site_rules (src/extract/ext_site.h). The format is
 * documented in docs/configuration.md and in the shipped conf/site.ini.
 *
 * A bad entry is reported as "FILE:LINE: [section] key: reason" (a bad
 * regex with regerror()'s text). Ownership: the caller frees the rules
 * with ext_site_rules_free(), also after a failure.
 */
#ifndef MITILOG_CONFIG_SITE_H
#define MITILOG_CONFIG_SITE_H

#include "extract/ext_site.h"
#include "util/status.h"

/* Built-in defaults, then the file; path NULL or "" = defaults only. */
mitilog_status config_site_load(const char *path, ext_site_rules *rules, mitilog_error *error);

#endif
