/* Classification of DS and IS values: ok, missing or invalid. The grammar
 * is the one of DICOM PS3.5 section 6.2 (Table 6.2-1); a value that does
 * not follow it is recorded as invalid, never repaired or guessed. */
#include <ctype.h>
#include <errno.h>
#include <limits.h>
#include <stdint.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "extract/ext.h"

enum { DECIMAL_STRING_MAXIMUM = 16, INTEGER_STRING_MAXIMUM = 12 };

/* Finds the value between leading and trailing spaces. Returns its length
 * and sets *start; 0 when the text is only spaces. */
static size_t trimmed_span(const char *raw, const char **start)
{
    const char *begin = raw;
    while (*begin == ' ')
        begin++;
    const char *end = begin + strlen(begin);
    while (end > begin && end[-1] == ' ')
        end--;
    *start = begin;
    return (size_t)(end - begin);
}

static size_t count_digits(const char *text, size_t length, size_t *position)
{
    size_t count = 0;
    while (*position < length && isdigit((unsigned char)text[*position])) {
        (*position)++;
        count++;
    }
    return count;
}

/* [+-] digits [. digits] [(E|e) [+-] digits], at least one mantissa digit. */
static int decimal_grammar_ok(const char *text, size_t length)
{
    size_t position = 0;
    if (position < length && (text[position] == '+' || text[position] == '-'))
        position++;
    size_t digits = count_digits(text, length, &position);
    if (position < length && text[position] == '.') {
        position++;
        digits += count_digits(text, length, &position);
    }
    if (digits == 0)
        return 0;
    if (position < length && (text[position] == 'E' || text[position] == 'e')) {
        position++;
        if (position < length && (text[position] == '+' || text[position] == '-'))
            position++;
        if (count_digits(text, length, &position) == 0)
            return 0;
    }
    return position == length;
}

exam_number ext_parse_decimal_string(const char *raw)
{
    exam_number number = {EXAM_VALUE_MISSING, 0.0};
    if (raw == NULL)
        return number;
    const char *start = NULL;
    size_t length = trimmed_span(raw, &start);
    if (length == 0)
        return number;
    number.status = EXAM_VALUE_INVALID;
    if (strlen(raw) > DECIMAL_STRING_MAXIMUM || !decimal_grammar_ok(start, length))
        return number;
    char buffer[DECIMAL_STRING_MAXIMUM + 1];
    memcpy(buffer, start, length);
    buffer[length] = '\0';
    /* strtod in the "C" locale: mitilog never calls setlocale(LC_NUMERIC). */
    errno = 0;
    double value = strtod(buffer, NULL);
    if (errno == ERANGE || !isfinite(value))
        return number;
    number.status = EXAM_VALUE_OK;
    number.value = value;
    return number;
}

exam_number ext_parse_integer_string(const char *raw)
{
    exam_number number = {EXAM_VALUE_MISSING, 0.0};
    if (raw == NULL)
        return number;
    const char *start = NULL;
    size_t length = trimmed_span(raw, &start);
    if (length == 0)
        return number;
    number.status = EXAM_VALUE_INVALID;
    if (strlen(raw) > INTEGER_STRING_MAXIMUM)
        return number;
    size_t position = 0;
    if (start[0] == '+' || start[0] == '-')
        position++;
    if (count_digits(start, length, &position) == 0 || position != length)
        return number;
    char buffer[INTEGER_STRING_MAXIMUM + 1];
    memcpy(buffer, start, length);
    buffer[length] = '\0';
    errno = 0;
    long value = strtol(buffer, NULL, 10);
    /* PS3.5: -2^31 <= n <= 2^31 - 1 */
    if (errno == ERANGE || value < INT32_MIN || value > INT32_MAX)
        return number;
    number.status = EXAM_VALUE_OK;
    number.value = (double)value;
    return number;
}

exam_number ext_frame_time_vector(const char *raw, double *sum_ms)
{
    exam_number number = {EXAM_VALUE_MISSING, 0.0};
    *sum_ms = 0.0;
    if (raw == NULL)
        return number;
    const char *start = NULL;
    if (trimmed_span(raw, &start) == 0)
        return number;
    number.status = EXAM_VALUE_INVALID;
    double sum = 0.0;
    size_t count = 0;
    const char *value = raw;
    for (;;) {
        const char *end = strchr(value, '\\');
        size_t length = end != NULL ? (size_t)(end - value) : strlen(value);
        char buffer[DECIMAL_STRING_MAXIMUM + 1];
        if (length > DECIMAL_STRING_MAXIMUM)
            return number;
        memcpy(buffer, value, length);
        buffer[length] = '\0';
        exam_number one = ext_parse_decimal_string(buffer);
        if (one.status != EXAM_VALUE_OK || one.value < 0)
            return number;
        if (count > 0) /* the first value is 0 by definition, not an interval */
            sum += one.value;
        count++;
        if (end == NULL)
            break;
        value = end + 1;
    }
    if (count < 2 || !(sum > 0))
        return number;
    number.status = EXAM_VALUE_OK;
    number.value = sum / (double)(count - 1);
    *sum_ms = sum;
    return number;
}
