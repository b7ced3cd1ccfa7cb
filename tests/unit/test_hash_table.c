/* The one hash table (util/hash_table.h): what it finds, replaces, grows
 * to and forgets when it is a bounded cache. Expectations are the
 * contract of the header (common practice for a map, no outside source);
 * the keys below were chosen to differ only in length or by a NUL byte,
 * the cases a text-only comparison would get wrong. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include <cmocka.h>

#include "util/hash_table.h"

static void finds_what_was_put_and_nothing_else(void **state)
{
    (void)state;
    hash_table table;
    hash_table_init(&table, 0);
    assert_null(hash_table_find(&table, "a", 1));
    static const char source[] = "source";
    assert_int_equal(hash_table_put(&table, "a", 1, 7, source), MITILOG_OK);
    assert_int_equal(hash_table_put(&table, "ab", 2, 8, NULL), MITILOG_OK);
    assert_int_equal(hash_table_put(&table, "a\0b", 3, 9, NULL), MITILOG_OK);
    assert_int_equal(hash_table_put(&table, "", 0, 10, NULL), MITILOG_OK);
    assert_int_equal(table.count, 4);
    const hash_entry *entry = hash_table_find(&table, "a", 1);
    assert_non_null(entry);
    assert_int_equal(entry->number, 7);
    assert_ptr_equal(entry->pointer, source);
    assert_int_equal(hash_table_find(&table, "ab", 2)->number, 8);
    assert_int_equal(hash_table_find(&table, "a\0b", 3)->number, 9);
    assert_int_equal(hash_table_find(&table, "", 0)->number, 10);
    assert_null(hash_table_find(&table, "b", 1));
    assert_null(hash_table_find(&table, "a\0", 2));
    /* A key held again: its values replaced, no second entry. */
    assert_int_equal(hash_table_put(&table, "a", 1, 70, NULL), MITILOG_OK);
    assert_int_equal(table.count, 4);
    assert_int_equal(hash_table_find(&table, "a", 1)->number, 70);
    assert_null(hash_table_find(&table, "a", 1)->pointer);
    hash_table_free(&table);
    assert_int_equal(table.count, 0);
    assert_null(hash_table_find(&table, "a", 1));
}

static void keeps_its_own_copy_of_keys(void **state)
{
    (void)state;
    hash_table table;
    hash_table_init(&table, 0);
    char key[16];
    snprintf(key, sizeof key, "room 1");
    assert_int_equal(hash_table_put(&table, key, strlen(key), 1, NULL), MITILOG_OK);
    snprintf(key, sizeof key, "room 2");
    assert_null(hash_table_find(&table, "room 2", 6));
    assert_non_null(hash_table_find(&table, "room 1", 6));
    hash_table_free(&table);
}

static void grows_without_losing_entries(void **state)
{
    (void)state;
    hash_table table;
    memset(&table, 0, sizeof table); /* zeroed: empty, no limit */
    char key[32];
    for (unsigned i = 0; i < 20000; i++) {
        int length = snprintf(key, sizeof key, "exam type %u", i);
        assert_int_equal(hash_table_put(&table, key, (size_t)length, i, NULL), MITILOG_OK);
    }
    assert_int_equal(table.count, 20000);
    assert_true(2 * table.count <= table.slot_count);
    for (unsigned i = 0; i < 20000; i++) {
        int length = snprintf(key, sizeof key, "exam type %u", i);
        const hash_entry *entry = hash_table_find(&table, key, (size_t)length);
        assert_non_null(entry);
        assert_int_equal(entry->number, i);
    }
    hash_table_free(&table);
}

static void a_full_cache_starts_again_empty(void **state)
{
    (void)state;
    hash_table table;
    hash_table_init(&table, 3);
    assert_int_equal(hash_table_put(&table, "1", 1, 1, NULL), MITILOG_OK);
    assert_int_equal(hash_table_put(&table, "2", 1, 2, NULL), MITILOG_OK);
    assert_int_equal(hash_table_put(&table, "3", 1, 3, NULL), MITILOG_OK);
    /* Replacing a held key is not a new entry: nothing is forgotten. */
    assert_int_equal(hash_table_put(&table, "3", 1, 30, NULL), MITILOG_OK);
    assert_int_equal(table.count, 3);
    assert_int_equal(hash_table_put(&table, "4", 1, 4, NULL), MITILOG_OK);
    assert_int_equal(table.count, 1);
    assert_null(hash_table_find(&table, "1", 1));
    assert_int_equal(hash_table_find(&table, "4", 1)->number, 4);
    for (unsigned i = 0; i < 1000; i++) {
        char key[16];
        int length = snprintf(key, sizeof key, "%u", i);
        assert_int_equal(hash_table_put(&table, key, (size_t)length, i, NULL), MITILOG_OK);
        assert_true(table.count <= 3);
    }
    hash_table_free(&table);
    assert_int_equal(table.limit, 3);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(finds_what_was_put_and_nothing_else),
        cmocka_unit_test(keeps_its_own_copy_of_keys),
        cmocka_unit_test(grows_without_losing_entries),
        cmocka_unit_test(a_full_cache_starts_again_empty),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
