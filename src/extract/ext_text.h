/*
 * ext_text.h - UTF-8 validity for stored strings (RFC 3629), used by
 * extraction and by the store's input checks. ext_text_to_utf8()
 * returns a malloc'ed copy (NULL only for NULL input or out of memory) with invalid bytes replaced by U+FFFD and
 * sets *replaced to 1 when it replaced anything.
 */
#ifndef MITILOG_EXT_TEXT_H
#define MITILOG_EXT_TEXT_H

int ext_text_is_utf8(const char *text);
char *ext_text_to_utf8(const char *text, int *replaced);

/* ext_charset.c: Specific Character Set (0008,0005) decoding for text the
 * shim did not convert [std: DICOM PS3.3 C.12.1.1.2, PS3.5 6.1]. */
int ext_text_is_ascii(const char *text);
/* 1 if the (first) value of Specific Character Set is ISO_IR 100 or
 * ISO 2022 IR 100 (Latin alphabet No. 1). */
int ext_charset_is_latin1(const char *specific_character_set);
/* ISO 8859-1 to UTF-8 (every byte is one code point); malloc'ed. */
char *ext_text_latin1_to_utf8(const char *text);
/* A malloc'ed UTF-8 copy of raw bytes sent in charset, padding trimmed:
 * Latin-1 decoded, UTF-8 (ISO_IR 192) and ASCII kept, anything else kept
 * where valid UTF-8 and otherwise repaired with U+FFFD (*replaced = 1).
 * NULL for NULL input; *failed = 1 when out of memory. */
char *ext_text_decode(const char *raw, const char *charset, int *replaced, int *failed);
/* Number of characters (code points) of UTF-8 text. */
size_t ext_text_characters(const char *text);

#endif
