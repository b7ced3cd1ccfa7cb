/* The rewrite of SQLite-style parameters to PostgreSQL's $N
 * (store/store_postgresql_text.h). The numbering each case expects is
 * SQLite's (sqlite.org/lang_expr.html, "Parameters": "?NNN" is NNN, "?"
 * the largest so far plus one, ":AAAA"/"$AAAA" the index the same name
 * had, else the largest plus one), cross-checked against sqlite3 itself
 * (sqlite3_bind_parameter_index and _count on the same text) in
 * matches_sqlite_numbering; what is left alone is PostgreSQL's lexical
 * structure (PostgreSQL documentation, "SQL Syntax": string constants,
 * C-style escapes E'...', dollar quoting, quoted identifiers, nested block
 * comments, "::" casts). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>
#include <sqlite3.h>

#include "store/store_postgresql_text.h"

static void rewrites(const char *sql, const char *expected, int count)
{
    store_postgresql_text text;
    mitilog_error error;
    assert_int_equal(store_postgresql_rewrite(sql, &text, &error), MITILOG_OK);
    assert_string_equal(text.text, expected);
    assert_int_equal(text.parameter_count, count);
    store_postgresql_text_free(&text);
}

static void numbered_parameters_keep_their_numbers(void **state)
{
    (void)state;
    rewrites("SELECT * FROM t WHERE a = ?1 AND b = ?2", "SELECT * FROM t WHERE a = $1 AND b = $2",
             2);
    rewrites("SELECT ?2, ?1, ?2", "SELECT $2, $1, $2", 2);
    /* A bare ? is the largest so far plus one. */
    rewrites("VALUES (?, ?, ?5, ?)", "VALUES ($1, $2, $5, $6)", 6);
    rewrites("SELECT 1", "SELECT 1", 0);
}

static void named_parameters_share_an_index(void **state)
{
    (void)state;
    store_postgresql_text text;
    mitilog_error error;
    assert_int_equal(
        store_postgresql_rewrite("SELECT :from, ?3, :to, :from, $day, :to", &text, &error),
        MITILOG_OK);
    assert_string_equal(text.text, "SELECT $1, $3, $4, $1, $5, $4");
    assert_int_equal(text.parameter_count, 5);
    assert_int_equal(store_postgresql_text_index(&text, ":from"), 1);
    assert_int_equal(store_postgresql_text_index(&text, ":to"), 4);
    assert_int_equal(store_postgresql_text_index(&text, "$day"), 5);
    assert_int_equal(store_postgresql_text_index(&text, ":day"), 0);
    assert_int_equal(store_postgresql_text_index(&text, "from"), 0);
    store_postgresql_text_free(&text);
}

static void literals_identifiers_and_comments_are_left_alone(void **state)
{
    (void)state;
    rewrites("SELECT ':a ?1', 'it''s ?', :b", "SELECT ':a ?1', 'it''s ?', $1", 1);
    rewrites("SELECT E'\\' ?1', ?2", "SELECT E'\\' ?1', $2", 2);
    rewrites("SELECT \"col ?1\", \"a\"\"b :c\" FROM t WHERE x = ?1",
             "SELECT \"col ?1\", \"a\"\"b :c\" FROM t WHERE x = $1", 1);
    rewrites("-- what ?1 :x means\nSELECT ?1 /* not :this /* nor ?9 */ ?2 */ + :y",
             "-- what ?1 :x means\nSELECT $1 /* not :this /* nor ?9 */ ?2 */ + $2", 2);
    rewrites("SELECT $$ ?1 :a $$, $body$ it's ? $body$, ?1",
             "SELECT $$ ?1 :a $$, $body$ it's ? "
             "$body$, $1",
             1);
}

static void postgresql_syntax_is_kept(void **state)
{
    (void)state;
    /* Casts, an override's own $N, names holding $ or : */
    rewrites("SELECT ?1::bigint, :id::text, x::numeric", "SELECT $1::bigint, $2::text, x::numeric",
             2);
    rewrites("SELECT $2 + $1", "SELECT $2 + $1", 2);
    rewrites("SELECT a$1 FROM t", "SELECT a$1 FROM t", 0);
    rewrites("SELECT f(a := 1)", "SELECT f(a := 1)", 0);
}

static void malformed_text_is_refused(void **state)
{
    (void)state;
    const char *bad[] = {"SELECT 'open",    "SELECT \"open", "SELECT /* open /* */",
                         "SELECT $x$ open", "SELECT ?0",     "SELECT ?40000"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        store_postgresql_text text;
        mitilog_error error = {{0}};
        assert_int_equal(store_postgresql_rewrite(bad[i], &text, &error), MITILOG_ERROR_INVALID);
        assert_true(error.text[0] != '\0');
        assert_null(text.text);
    }
}

/* The numbering of every case agrees with SQLite's own. */
static void matches_sqlite_numbering(void **state)
{
    (void)state;
    const char *cases[] = {"SELECT :from, ?3, :to, :from, $day, :to", "SELECT ?, ?, ?5, ?, :a",
                           "SELECT :a, :b, ?1, :a, ?"};
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(":memory:", &db), SQLITE_OK);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        sqlite3_stmt *statement = NULL;
        assert_int_equal(sqlite3_prepare_v2(db, cases[i], -1, &statement, NULL), SQLITE_OK);
        store_postgresql_text text;
        mitilog_error error;
        assert_int_equal(store_postgresql_rewrite(cases[i], &text, &error), MITILOG_OK);
        assert_int_equal(text.parameter_count, sqlite3_bind_parameter_count(statement));
        for (int n = 1; n <= text.parameter_count; n++) {
            const char *name = sqlite3_bind_parameter_name(statement, n);
            if (name != NULL && name[0] != '?')
                assert_int_equal(store_postgresql_text_index(&text, name), n);
        }
        store_postgresql_text_free(&text);
        sqlite3_finalize(statement);
    }
    sqlite3_close(db);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(numbered_parameters_keep_their_numbers),
        cmocka_unit_test(named_parameters_share_an_index),
        cmocka_unit_test(literals_identifiers_and_comments_are_left_alone),
        cmocka_unit_test(postgresql_syntax_is_kept),
        cmocka_unit_test(malformed_text_is_refused),
        cmocka_unit_test(matches_sqlite_numbering),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
