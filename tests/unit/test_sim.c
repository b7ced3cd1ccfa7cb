/*
 * test_sim.c - the simulator's random numbers, calendar, schedule and
 * exam model (src/sim).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "sim/sim.h"

/* splitmix64 seeded with 0: the first outputs of Vigna's reference
 * splitmix64.c (https://prng.di.unimi.it/splitmix64.c), the values that
 * also seed xoshiro256** from state 0. */
static void test_splitmix64_reference(void **state)
{
    (void)state;
    sim_rng rng;
    sim_rng_seed(&rng, 0);
    assert_true(sim_rng_next(&rng) == UINT64_C(0xe220a8397b1dcdaf));
    assert_true(sim_rng_next(&rng) == UINT64_C(0x6e789e6aa1b965f4));
    assert_true(sim_rng_next(&rng) == UINT64_C(0x06c45d188009454f));
    assert_true(sim_rng_next(&rng) == UINT64_C(0xf88bb8a8724c81ec));
}

static void test_rng_same_seed_same_sequence(void **state)
{
    (void)state;
    sim_rng a, b, c;
    sim_rng_seed(&a, 42);
    sim_rng_seed(&b, 42);
    sim_rng_seed(&c, 43);
    int differs = 0;
    for (int i = 0; i < 1000; i++) {
        uint64_t x = sim_rng_next(&a);
        assert_true(x == sim_rng_next(&b));
        differs |= x != sim_rng_next(&c);
    }
    assert_true(differs);
}

static void test_rng_ranges(void **state)
{
    (void)state;
    sim_rng rng;
    sim_rng_seed(&rng, 7);
    int seen[5] = {0};
    for (int i = 0; i < 10000; i++) {
        double u = sim_rng_uniform(&rng);
        assert_true(u >= 0.0 && u < 1.0);
        int r = sim_rng_range(&rng, 3, 7);
        assert_in_range(r, 3, 7);
        seen[r - 3]++;
    }
    for (int i = 0; i < 5; i++)
        assert_true(seen[i] > 1500);
    double weights[3] = {0.0, 1.0, 0.0};
    assert_int_equal(sim_rng_pick(&rng, weights, 3), 1);
    double none[2] = {0.0, 0.0};
    assert_int_equal(sim_rng_pick(&rng, none, 2), -1);
}

static void test_shift_boundaries(void **state)
{
    (void)state;
    assert_int_equal(sim_shift_of_minute(6 * 60 + 59), SIM_SHIFT_NIGHT);
    assert_int_equal(sim_shift_of_minute(7 * 60), SIM_SHIFT_DAY);
    assert_int_equal(sim_shift_of_minute(14 * 60 + 59), SIM_SHIFT_DAY);
    assert_int_equal(sim_shift_of_minute(15 * 60), SIM_SHIFT_EVENING);
    assert_int_equal(sim_shift_of_minute(22 * 60 + 59), SIM_SHIFT_EVENING);
    assert_int_equal(sim_shift_of_minute(23 * 60), SIM_SHIFT_NIGHT);
    assert_int_equal(sim_shift_of_minute(0), SIM_SHIFT_NIGHT);
    /* Minutes past midnight of the next day (night shift runs to 31h). */
    assert_int_equal(sim_shift_of_minute(24 * 60 + 6 * 60), SIM_SHIFT_NIGHT);
    assert_int_equal(sim_shift_of_minute(24 * 60 + 7 * 60), SIM_SHIFT_DAY);
    assert_string_equal(sim_shift_name(SIM_SHIFT_EVENING), "evening");
}

static void test_calendar(void **state)
{
    (void)state;
    sim_date d;
    assert_int_equal(sim_date_parse("2026-11-02", &d), 0);
    assert_int_equal(sim_date_weekday(d), 0);          /* a Monday */
    assert_int_equal(sim_date_to_days((sim_date){1970, 1, 1}), 0);
    sim_date back = sim_date_from_days(sim_date_to_days(d) + 29);
    assert_int_equal(back.year, 2026);
    assert_int_equal(back.month, 12);
    assert_int_equal(back.day, 1);
    assert_int_equal(sim_date_parse("2026-02-29", &d), -1);
    assert_int_equal(sim_date_parse("2024-02-29", &d), 0);
    assert_int_equal(sim_date_parse("2026-1-02", &d), -1);
    assert_int_equal(sim_date_parse("2026-11-02x", &d), -1);
}

static void test_schedule_volumes(void **state)
{
    (void)state;
    sim_day *day = malloc(sizeof *day);
    assert_non_null(day);
    for (uint64_t seed = 1; seed <= 5; seed++) {
        for (int d = 0; d < 28; d++) {
            int weekday = d % 7;
            sim_day_schedule(seed, d, weekday, day);
            int low = weekday >= 5 ? SIM_WEEKEND_EXAMS_LOW
                                   : SIM_WEEKDAY_EXAMS_LOW;
            int high = weekday >= 5 ? SIM_WEEKEND_EXAMS_HIGH
                                    : SIM_WEEKDAY_EXAMS_HIGH;
            assert_in_range(day->count, low, high);
            int night = 0;
            for (size_t i = 0; i < day->count; i++) {
                const sim_slot *s = &day->slots[i];
                if (i > 0)
                    assert_true(s->start_minute
                                >= day->slots[i - 1].start_minute);
                assert_int_equal(sim_shift_of_minute(s->start_minute),
                                 s->shift);
                night += s->shift == SIM_SHIFT_NIGHT;
            }
            assert_in_range(night, 1, 6);   /* the night is small */
        }
    }
    free(day);
}

static void test_schedule_deterministic(void **state)
{
    (void)state;
    sim_day *a = malloc(sizeof *a), *b = malloc(sizeof *b);
    assert_non_null(a);
    assert_non_null(b);
    sim_day_schedule(9, 3, 3, a);
    sim_day_schedule(9, 3, 3, b);
    assert_memory_equal(a, b, sizeof *a);
    free(a);
    free(b);
}

static void test_exam_captures(void **state)
{
    (void)state;
    sim_day *day = malloc(sizeof *day);
    sim_exam *exam = malloc(sizeof *exam);
    assert_non_null(day);
    assert_non_null(exam);
    for (int d = 0; d < 28; d++) {
        sim_day_schedule(1, d, d % 7, day);
        sim_planted_mark(day, 28);
        for (size_t i = 0; i < day->count; i++) {
            sim_exam_build(d, (int)i + 1, &day->slots[i], exam);
            assert_in_range(exam->capture_count, SIM_CAPTURES_LOW,
                            SIM_CAPTURES_HIGH);
            for (size_t c = 0; c < exam->capture_count; c++) {
                const sim_capture *cap = &exam->captures[c];
                if (c > 0)
                    assert_true(cap->second > exam->captures[c - 1].second);
                assert_in_range(cap->frames, 1, 120);
                if (cap->frames > 1)
                    assert_true(cap->frame_time_ms >= 20.0
                                && cap->frame_time_ms <= 40.0);
                if (cap->has_indices)
                    assert_true(cap->mi >= 0.1 && cap->mi <= 2.1);
            }
        }
    }
    free(day);
    free(exam);
}

static void test_planted_marks(void **state)
{
    (void)state;
    sim_day *day = malloc(sizeof *day);
    assert_non_null(day);
    unsigned all = 0;
    int mi_over = 0, resend = 0, tic = 0;
    for (int d = 0; d < 28; d++) {
        sim_day_schedule(1, d, d % 7, day);
        sim_planted_mark(day, 28);
        for (size_t i = 0; i < day->count; i++) {
            all |= day->slots[i].planted;
            mi_over += (day->slots[i].planted & SIM_PLANTED_MI_OVER_LIMIT) != 0;
            resend += (day->slots[i].planted & SIM_PLANTED_RESEND) != 0;
            tic += (day->slots[i].planted & SIM_PLANTED_TIC_HIGH) != 0;
        }
    }
    assert_int_equal(all, 0x3Fu);   /* every planted problem occurs */
    assert_int_equal(mi_over, 3);
    assert_int_equal(resend, 1);
    assert_int_equal(tic, 1);
    char tags[128];
    sim_planted_tags(SIM_PLANTED_HOT_PRESET | SIM_PLANTED_RESEND, tags,
                     sizeof tags);
    assert_string_equal(tags, "hot-preset;resend");
    free(day);
}

static void test_uid_form(void **state)
{
    (void)state;
    char a[72], b[72], c[72];
    sim_uid(1, 1, 2, 3, a, sizeof a);
    sim_uid(1, 1, 2, 3, b, sizeof b);
    sim_uid(2, 1, 2, 3, c, sizeof c);
    assert_string_equal(a, b);
    assert_string_not_equal(a, c);
    assert_memory_equal(a, "2.25.", 5);
    assert_true(strlen(a) <= 64);
    assert_true(a[5] != '0');
    for (const char *p = a + 5; *p; p++)
        assert_true(*p >= '0' && *p <= '9');
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_splitmix64_reference),
        cmocka_unit_test(test_rng_same_seed_same_sequence),
        cmocka_unit_test(test_rng_ranges),
        cmocka_unit_test(test_shift_boundaries),
        cmocka_unit_test(test_calendar),
        cmocka_unit_test(test_schedule_volumes),
        cmocka_unit_test(test_schedule_deterministic),
        cmocka_unit_test(test_exam_captures),
        cmocka_unit_test(test_planted_marks),
        cmocka_unit_test(test_uid_form),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
