/*
 * ext_text.h - UTF-8 validity for stored strings (RFC 3629). Internal to
 * extraction. ext_text_to_utf8() returns a malloc'ed copy (NULL only for
 * NULL input or out of memory) with invalid bytes replaced by U+FFFD and
 * sets *replaced to 1 when it replaced anything.
 */
#ifndef MITILOG_EXT_TEXT_H
#define MITILOG_EXT_TEXT_H

int ext_text_is_utf8(const char *text);
char *ext_text_to_utf8(const char *text, int *replaced);

#endif
