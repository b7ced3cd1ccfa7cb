/* Text hygiene for stored strings: every string the store keeps must be
 * valid UTF-8 so that it can be served as JSON. Bytes that are not (a
 * character set DCMTK could not convert, or a sender's garbage) are
 * replaced by U+FFFD; the record says so, and the raw object is kept
 * under the retention setting. */
#include <stdlib.h>
#include <string.h>

#include "extract/ext_text.h"

/* Length of the valid UTF-8 sequence at text (RFC 3629), 0 if invalid. */
static size_t utf8_sequence_length(const unsigned char *text)
{
    unsigned char lead = text[0];
    if (lead < 0x80)
        return 1;
    size_t length;
    unsigned minimum;
    unsigned code;
    if (lead >= 0xC2 && lead <= 0xDF) {
        length = 2, minimum = 0x80, code = lead & 0x1F;
    } else if (lead >= 0xE0 && lead <= 0xEF) {
        length = 3, minimum = 0x800, code = lead & 0x0F;
    } else if (lead >= 0xF0 && lead <= 0xF4) {
        length = 4, minimum = 0x10000, code = lead & 0x07;
    } else {
        return 0;
    }
    for (size_t i = 1; i < length; i++) {
        if ((text[i] & 0xC0) != 0x80)
            return 0;
        code = (code << 6) | (text[i] & 0x3F);
    }
    if (code < minimum || code > 0x10FFFF || (code >= 0xD800 && code <= 0xDFFF))
        return 0;
    return length;
}

int ext_text_is_utf8(const char *text)
{
    const unsigned char *cursor = (const unsigned char *)text;
    while (*cursor) {
        size_t length = utf8_sequence_length(cursor);
        if (length == 0)
            return 0;
        cursor += length;
    }
    return 1;
}

char *ext_text_to_utf8(const char *text, int *replaced)
{
    if (text == NULL)
        return NULL;
    if (ext_text_is_utf8(text))
        return strdup(text);
    *replaced = 1;
    size_t size = strlen(text) * 3 + 1; /* each bad byte becomes 3 bytes */
    char *out = malloc(size);
    if (out == NULL)
        return NULL;
    const unsigned char *cursor = (const unsigned char *)text;
    size_t used = 0;
    while (*cursor) {
        size_t length = utf8_sequence_length(cursor);
        if (length == 0) {
            memcpy(out + used, "\xEF\xBF\xBD", 3);
            used += 3;
            cursor++;
        } else {
            memcpy(out + used, cursor, length);
            used += length;
            cursor += length;
        }
    }
    out[used] = '\0';
    return out;
}
