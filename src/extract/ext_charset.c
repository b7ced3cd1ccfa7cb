/* Specific Character Set decoding for text the shim did not convert
 * (ext_text.h). */
#include <stdlib.h>
#include <string.h>

#include "extract/ext_text.h"

int ext_text_is_ascii(const char *text)
{
    for (const unsigned char *c = (const unsigned char *)text; c != NULL && *c; c++)
        if (*c >= 0x80)
            return 0;
    return 1;
}

int ext_charset_is_latin1(const char *charset)
{
    if (charset == NULL)
        return 0;
    while (*charset == ' ' || *charset == '\\')
        charset++;
    return strncmp(charset, "ISO_IR 100", 10) == 0 || strncmp(charset, "ISO 2022 IR 100", 15) == 0;
}

char *ext_text_latin1_to_utf8(const char *text)
{
    size_t length = strlen(text);
    char *out = malloc(length * 2 + 1);
    if (out == NULL)
        return NULL;
    size_t n = 0;
    for (const unsigned char *c = (const unsigned char *)text; *c; c++) {
        if (*c < 0x80) {
            out[n++] = (char)*c;
        } else {
            out[n++] = (char)(0xC0 | (*c >> 6));
            out[n++] = (char)(0x80 | (*c & 0x3F));
        }
    }
    out[n] = '\0';
    return out;
}

char *ext_text_decode(const char *raw, const char *charset, int *replaced, int *failed)
{
    if (raw == NULL)
        return NULL;
    while (*raw == ' ')
        raw++;
    size_t length = strlen(raw);
    while (length > 0 && (raw[length - 1] == ' ' || raw[length - 1] == '\0'))
        length--;
    char *copy = strndup(raw, length);
    if (copy == NULL) {
        *failed = 1;
        return NULL;
    }
    char *result;
    if (ext_text_is_ascii(copy))
        return copy;
    if (ext_charset_is_latin1(charset))
        result = ext_text_latin1_to_utf8(copy);
    else
        result = ext_text_to_utf8(copy, replaced);
    free(copy);
    if (result == NULL)
        *failed = 1;
    return result;
}

size_t ext_text_characters(const char *text)
{
    size_t count = 0;
    for (const unsigned char *c = (const unsigned char *)text; c != NULL && *c; c++)
        count += (*c & 0xC0) != 0x80;
    return count;
}
