/* The JSON writer (src/json/json.h) against two outside references:
 *   - SQLite's own JSON functions (json_array(), json_object()) on the same
 *     values: the writer must produce the same bytes, since the documents
 *     it writes used to be printed by them;
 *   - Python's json module (/usr/bin/python3) as an independent parser:
 *     every document must parse, and strings and numbers come back as
 *     written (RFC 8259 sections 6 and 7).
 * The RFC 8259 section 13 examples are written and parsed too. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>
#include <sqlite3.h>

#include "json/json.h"

/* The finished document of a writer; fails the test on an error. */
static char *finish(json_writer *writer)
{
    char *text = NULL;
    mitilog_error error = {{0}};
    mitilog_status status = json_writer_take(writer, &text, &error);
    if (status != MITILOG_OK)
        fail_msg("writer failed: %s", error.text);
    json_writer_free(writer);
    return text;
}

/* What SQLite prints for one SQL expression with one bound value. */
static char *sqlite_text(const char *sql, int is_text, const char *text, double number)
{
    sqlite3 *db = NULL;
    sqlite3_stmt *statement = NULL;
    assert_int_equal(sqlite3_open(":memory:", &db), SQLITE_OK);
    assert_int_equal(sqlite3_prepare_v2(db, sql, -1, &statement, NULL), SQLITE_OK);
    if (is_text)
        sqlite3_bind_text(statement, 1, text, -1, SQLITE_STATIC);
    else
        sqlite3_bind_double(statement, 1, number);
    assert_int_equal(sqlite3_step(statement), SQLITE_ROW);
    char *out = strdup((const char *)sqlite3_column_text(statement, 0));
    sqlite3_finalize(statement);
    sqlite3_close(db);
    return out;
}

/* Runs Python's json module over document with a check script that
 * reads the parsed value as `doc` and the expected one from argument 1
 * (a Python literal); 0 when the check holds. */
static int python_check(const char *document, const char *expected_literal, const char *check)
{
    char path[] = "/tmp/mitilog-test-json-XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    FILE *file = fdopen(fd, "w");
    assert_non_null(file);
    fputs(document, file);
    fclose(file);
    char script[] = "/tmp/mitilog-test-json-py-XXXXXX";
    fd = mkstemp(script);
    assert_true(fd >= 0);
    file = fdopen(fd, "w");
    assert_non_null(file);
    fprintf(file,
            "import json, math, sys\n"
            "with open(sys.argv[1], encoding='utf-8') as f:\n"
            "    doc = json.load(f)\n"
            "with open(sys.argv[2], encoding='utf-8') as f:\n"
            "    expected = eval(f.read())\n"
            "ok = %s\n"
            "print(repr(doc)[:300] if not ok else '', file=sys.stderr)\n"
            "sys.exit(0 if ok else 1)\n",
            check);
    fclose(file);
    char expected_path[] = "/tmp/mitilog-test-json-expected-XXXXXX";
    fd = mkstemp(expected_path);
    assert_true(fd >= 0);
    file = fdopen(fd, "w");
    assert_non_null(file);
    fputs(expected_literal, file);
    fclose(file);
    char command[512];
    snprintf(command, sizeof command, "/usr/bin/python3 %s %s %s", script, path, expected_path);
    int rc = system(command);
    unlink(path);
    unlink(script);
    unlink(expected_path);
    return rc;
}

/* Strings that stress RFC 8259 section 7: quotation mark, reverse solidus,
 * every control character (U+0001..U+001F), DEL, solidus, two-, three- and
 * four-byte UTF-8, U+2028 (a line separator JSON allows raw). */
static const char *const tricky_strings[] = {
    "",
    "plain",
    "quote \" and backslash \\ and solidus /",
    "\x01\x02\x03\x04\x05\x06\x07\b\t\n\x0b\f\r\x0e\x0f",
    "\x10\x11\x12\x13\x14\x15\x16\x17\x18\x19\x1a\x1b\x1c\x1d\x1e\x1f",
    "DEL \x7f end",
    "Salle \xc3\xa9"
    "chographie 2 \xe2\x80\x94 \xe2\x82\xac \xf0\x9f\x98\x80",
    "line\xe2\x80\xa8separator",
    "\\u0041 is not an escape here",
    "trailing backslash \\",
};
enum { TRICKY_COUNT = sizeof tricky_strings / sizeof tricky_strings[0] };

/* Byte for byte what SQLite's json_array(?) prints for the same text
 * (SQLite 3.40 json.c, jsonAppendString). */
static void strings_as_sqlite_prints_them(void **state)
{
    (void)state;
    for (size_t i = 0; i < TRICKY_COUNT; i++) {
        json_writer writer;
        json_writer_init(&writer);
        json_array_begin(&writer);
        json_string(&writer, tricky_strings[i]);
        json_array_end(&writer);
        char *mine = finish(&writer);
        char *reference = sqlite_text("SELECT json_array(?1)", 1, tricky_strings[i], 0);
        assert_string_equal(mine, reference);
        free(mine);
        free(reference);
    }
}

/* Byte for byte what SQLite's json_array(?) prints for the same double:
 * its "%!.15g" (1.0, 0.7, 1.0e-05, 1.0e+20); a mix of hand-picked values
 * and 20000 pseudo-random bit patterns (common practice, no source). */
static void numbers_as_sqlite_prints_them(void **state)
{
    (void)state;
    static const double picked[] = {0.0,
                                    -0.0,
                                    1.0,
                                    -1.0,
                                    0.7,
                                    12.345,
                                    1e-05,
                                    0.0001,
                                    1e20,
                                    1e15,
                                    1e14,
                                    123456789012345.0,
                                    1234567890123456.0,
                                    0.1 + 0.2,
                                    1.0 / 3.0,
                                    2.5,
                                    100.0,
                                    5e-324,
                                    1.7976931348623157e308,
                                    -2.2250738585072014e-308,
                                    999999999999999.9,
                                    99999999999999.99,
                                    3.0,
                                    1.5,
                                    2.0};
    uint64_t seed = 0x9e3779b97f4a7c15u;
    for (size_t i = 0; i < 20000 + sizeof picked / sizeof picked[0]; i++) {
        double value;
        if (i < sizeof picked / sizeof picked[0]) {
            value = picked[i];
        } else {
            /* splitmix64 (Steele, Lea, Flood 2014) */
            uint64_t z = (seed += 0x9e3779b97f4a7c15u);
            z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9u;
            z = (z ^ (z >> 27)) * 0x94d049bb133111ebu;
            z ^= z >> 31;
            if (i % 2)
                memcpy(&value, &z, sizeof value);
            else
                value = (double)(z % 100000000u) / 1000.0;
            if (!isfinite(value))
                continue;
        }
        json_writer writer;
        json_writer_init(&writer);
        json_array_begin(&writer);
        json_number(&writer, 1, value);
        json_array_end(&writer);
        char *mine = finish(&writer);
        char *reference = sqlite_text("SELECT json_array(?1)", 0, NULL, value);
        if (strcmp(mine, reference) != 0)
            fail_msg("%.17g: writer %s, SQLite %s", value, mine, reference);
        free(mine);
        free(reference);
    }
}

/* Absent, NaN and infinities have no JSON number (RFC 8259 section 6):
 * null, as SQLite prints a NULL. */
static void missing_numbers_are_null(void **state)
{
    (void)state;
    json_writer writer;
    json_writer_init(&writer);
    json_array_begin(&writer);
    json_number(&writer, 0, 1.0);
    json_number(&writer, 1, NAN);
    json_number(&writer, 1, INFINITY);
    json_number(&writer, 1, -INFINITY);
    json_string(&writer, NULL);
    json_integer(&writer, -9223372036854775807LL - 1);
    json_boolean(&writer, 7);
    json_boolean(&writer, 0);
    json_array_end(&writer);
    char *mine = finish(&writer);
    assert_string_equal(mine, "[null,null,null,null,null,-9223372036854775808,true,false]");
    free(mine);
}

/* Nested objects and arrays as SQLite's json_object() writes them: no
 * white space, members in the order written. */
static void containers_as_sqlite_prints_them(void **state)
{
    (void)state;
    json_writer writer;
    json_writer_init(&writer);
    json_object_begin(&writer);
    json_key(&writer, "a");
    json_integer(&writer, 1);
    json_key(&writer, "b");
    json_array_begin(&writer);
    json_array_end(&writer);
    json_key(&writer, "c");
    json_object_begin(&writer);
    json_object_end(&writer);
    json_key(&writer, "d");
    json_array_begin(&writer);
    json_number(&writer, 1, 2.0);
    json_object_begin(&writer);
    json_key(&writer, "k\"ey");
    json_null(&writer);
    json_object_end(&writer);
    json_boolean(&writer, 1);
    json_array_end(&writer);
    json_object_end(&writer);
    char *mine = finish(&writer);
    char *reference =
        sqlite_text("SELECT json_object('a', 1, 'b', json_array(), 'c', json_object(), 'd', "
                    "json_array(?1, json_object('k\"ey', NULL), json('true')))",
                    0, NULL, 2.0);
    assert_string_equal(mine, reference);
    free(mine);
    free(reference);
}

/* Python's json module reads every tricky string back as written. */
static void strings_round_trip_through_python(void **state)
{
    (void)state;
    json_writer writer;
    json_writer_init(&writer);
    json_array_begin(&writer);
    for (size_t i = 0; i < TRICKY_COUNT; i++)
        json_string(&writer, tricky_strings[i]);
    json_array_end(&writer);
    char *mine = finish(&writer);
    /* the expected list as Python bytes, decoded: no escaping is shared
     * with the writer */
    char literal[4096] = "[";
    size_t used = 1;
    for (size_t i = 0; i < TRICKY_COUNT; i++) {
        used += (size_t)snprintf(literal + used, sizeof literal - used, "b'");
        for (const unsigned char *p = (const unsigned char *)tricky_strings[i]; *p; p++)
            used += (size_t)snprintf(literal + used, sizeof literal - used, "\\x%02x", *p);
        used += (size_t)snprintf(literal + used, sizeof literal - used, "'.decode('utf-8'),");
    }
    snprintf(literal + used, sizeof literal - used, "]");
    assert_int_equal(python_check(mine, literal, "doc == expected"), 0);
    free(mine);
}

/* Python reads the numbers back within the 15 significant digits written
 * (relative difference below 1e-14). Not the largest double: its 15-digit
 * form, 1.79769313486232e+308 (as SQLite prints it too), is above it and
 * parsers read it as infinity. */
static void numbers_round_trip_through_python(void **state)
{
    (void)state;
    static const double values[] = {
        0.7,           12.345,          1e-05,   1e20,   1.0 / 3.0, 2.0 / 3.0, 123456.789012345,
        6.02214076e23, 1.602176634e-19, -273.15, 5e-324, 1.5e308};
    json_writer writer;
    json_writer_init(&writer);
    json_array_begin(&writer);
    char literal[2048] = "[";
    size_t used = 1;
    for (size_t i = 0; i < sizeof values / sizeof values[0]; i++) {
        json_number(&writer, 1, values[i]);
        used += (size_t)snprintf(literal + used, sizeof literal - used, "float.fromhex('%a'),",
                                 values[i]);
    }
    json_array_end(&writer);
    snprintf(literal + used, sizeof literal - used, "]");
    char *mine = finish(&writer);
    assert_int_equal(
        python_check(mine, literal,
                     "len(doc) == len(expected) and all(isinstance(d, float) and "
                     "(d == e or abs(d - e) <= 1e-14 * abs(e)) for d, e in zip(doc, expected))"),
        0);
    free(mine);
}

/* RFC 8259 section 13, the two examples, written with the writer and read
 * by Python as the values the RFC shows. */
static void rfc8259_examples(void **state)
{
    (void)state;
    json_writer writer;
    json_writer_init(&writer);
    json_object_begin(&writer);
    json_key(&writer, "Image");
    json_object_begin(&writer);
    json_key(&writer, "Width");
    json_integer(&writer, 800);
    json_key(&writer, "Height");
    json_integer(&writer, 600);
    json_key(&writer, "Title");
    json_string(&writer, "View from 15th Floor");
    json_key(&writer, "Thumbnail");
    json_object_begin(&writer);
    json_key(&writer, "Url");
    json_string(&writer, "http://www.example.com/image/481989943");
    json_key(&writer, "Height");
    json_integer(&writer, 125);
    json_key(&writer, "Width");
    json_integer(&writer, 100);
    json_object_end(&writer);
    json_key(&writer, "Animated");
    json_boolean(&writer, 0);
    json_key(&writer, "IDs");
    json_array_begin(&writer);
    json_integer(&writer, 116);
    json_integer(&writer, 943);
    json_integer(&writer, 234);
    json_integer(&writer, 38793);
    json_array_end(&writer);
    json_object_end(&writer);
    json_object_end(&writer);
    char *image = finish(&writer);
    assert_int_equal(
        python_check(image,
                     "{'Image': {'Width': 800, 'Height': 600, 'Title': 'View from 15th Floor',"
                     " 'Thumbnail': {'Url': 'http://www.example.com/image/481989943',"
                     " 'Height': 125, 'Width': 100}, 'Animated': False,"
                     " 'IDs': [116, 943, 234, 38793]}}",
                     "doc == expected and list(doc['Image']) == list(expected['Image'])"),
        0);
    free(image);

    static const struct {
        double latitude, longitude;
        const char *city, *zip;
    } places[] = {{37.7668, -122.3959, "SAN FRANCISCO", "94107"},
                  {37.371991, -122.026020, "SUNNYVALE", "94085"}};
    json_writer_init(&writer);
    json_array_begin(&writer);
    for (size_t i = 0; i < 2; i++) {
        json_object_begin(&writer);
        json_key(&writer, "precision");
        json_string(&writer, "zip");
        json_key(&writer, "Latitude");
        json_number(&writer, 1, places[i].latitude);
        json_key(&writer, "Longitude");
        json_number(&writer, 1, places[i].longitude);
        json_key(&writer, "Address");
        json_string(&writer, "");
        json_key(&writer, "City");
        json_string(&writer, places[i].city);
        json_key(&writer, "State");
        json_string(&writer, "CA");
        json_key(&writer, "Zip");
        json_string(&writer, places[i].zip);
        json_key(&writer, "Country");
        json_string(&writer, "US");
        json_object_end(&writer);
    }
    json_array_end(&writer);
    char *places_text = finish(&writer);
    assert_int_equal(
        python_check(places_text,
                     "[{'precision': 'zip', 'Latitude': 37.7668, 'Longitude': -122.3959,"
                     " 'Address': '', 'City': 'SAN FRANCISCO', 'State': 'CA', 'Zip': '94107',"
                     " 'Country': 'US'}, {'precision': 'zip', 'Latitude': 37.371991,"
                     " 'Longitude': -122.02602, 'Address': '', 'City': 'SUNNYVALE',"
                     " 'State': 'CA', 'Zip': '94085', 'Country': 'US'}]",
                     "doc == expected"),
        0);
    free(places_text);
}

/* Misuse is refused with a status, never a malformed document (common
 * practice, no source). */
static void misuse_is_an_error(void **state)
{
    (void)state;
    char *text = NULL;
    mitilog_error error = {{0}};
    json_writer writer;

    json_writer_init(&writer); /* a member without a key */
    json_object_begin(&writer);
    json_integer(&writer, 1);
    json_object_end(&writer);
    assert_int_equal(json_writer_take(&writer, &text, &error), MITILOG_ERROR_INVALID);
    assert_null(text);
    assert_non_null(strstr(error.text, "without a key"));

    json_writer_init(&writer); /* a key in an array */
    json_array_begin(&writer);
    json_key(&writer, "a");
    assert_int_equal(json_writer_take(&writer, &text, &error), MITILOG_ERROR_INVALID);

    json_writer_init(&writer); /* still open */
    json_array_begin(&writer);
    assert_int_equal(json_writer_take(&writer, &text, &error), MITILOG_ERROR_INVALID);

    json_writer_init(&writer); /* ended by the other kind */
    json_array_begin(&writer);
    json_object_end(&writer);
    assert_int_equal(json_writer_take(&writer, &text, &error), MITILOG_ERROR_INVALID);

    json_writer_init(&writer); /* a key waiting for its value */
    json_object_begin(&writer);
    json_key(&writer, "a");
    json_object_end(&writer);
    assert_int_equal(json_writer_take(&writer, &text, &error), MITILOG_ERROR_INVALID);

    json_writer_init(&writer); /* too deep */
    for (int i = 0; i <= JSON_MAX_DEPTH; i++)
        json_array_begin(&writer);
    assert_int_equal(json_writer_take(&writer, &text, &error), MITILOG_ERROR_INVALID);

    json_writer_init(&writer); /* nothing written */
    assert_int_equal(json_writer_take(&writer, &text, &error), MITILOG_ERROR_INVALID);
    json_writer_free(&writer);
}

/* A document larger than the first buffer grows and stays whole. */
static void large_document_grows(void **state)
{
    (void)state;
    json_writer writer;
    json_writer_init(&writer);
    json_array_begin(&writer);
    for (int i = 0; i < 100000; i++)
        json_integer(&writer, i);
    json_array_end(&writer);
    char *text = finish(&writer);
    assert_int_equal(python_check(text, "list(range(100000))", "doc == expected"), 0);
    free(text);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(strings_as_sqlite_prints_them),
        cmocka_unit_test(numbers_as_sqlite_prints_them),
        cmocka_unit_test(missing_numbers_are_null),
        cmocka_unit_test(containers_as_sqlite_prints_them),
        cmocka_unit_test(strings_round_trip_through_python),
        cmocka_unit_test(numbers_round_trip_through_python),
        cmocka_unit_test(rfc8259_examples),
        cmocka_unit_test(misuse_is_an_error),
        cmocka_unit_test(large_document_grows),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
