/* Statistics checked against Python's statistics module on the same
 * numbers. The expected values were printed by (Python 3.11):
 *   import statistics as s
 *   data = [0.4,1.2,0.9,2.3,0.7,1.1,1.5,0.3,0.8,1.0,1.9]
 *   s.median(data)                                  -> 1.0
 *   s.quantiles(data, n=4, method='inclusive')      -> [0.75, 1.0, 1.35]
 *   s.quantiles(data, n=20, method='inclusive')[18] -> 2.1   (P95)
 *   even = [1.0, 2.0, 4.0, 7.0]
 *   s.median(even) -> 3.0; quantiles(n=4) -> [1.75, 3.0, 4.75];
 *   quantiles(n=20)[18] -> 6.55
 * The 'inclusive' method is Hyndman & Fan (1996) type 7 (R's default). */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "stats/stats.h"

#define assert_close(actual, expected)                                                             \
    do {                                                                                           \
        double actual_value = (actual), expected_value = (expected);                               \
        if (fabs(actual_value - expected_value) > 1e-12)                                           \
            fail_msg("%.15g != %.15g", actual_value, expected_value);                              \
    } while (0)

static const double data[] = {0.4, 1.2, 0.9, 2.3, 0.7, 1.1, 1.5, 0.3, 0.8, 1.0, 1.9};
enum { DATA_COUNT = sizeof data / sizeof data[0] };

static void quantiles_match_python_inclusive(void **state)
{
    (void)state;
    double sorted[DATA_COUNT];
    memcpy(sorted, data, sizeof data);
    stats_sort(sorted, DATA_COUNT);
    double value;
    assert_int_equal(stats_median_sorted(sorted, DATA_COUNT, &value), MITILOG_OK);
    assert_close(value, 1.0);
    stats_quantile_sorted(sorted, DATA_COUNT, 0.25, &value);
    assert_close(value, 0.75);
    stats_quantile_sorted(sorted, DATA_COUNT, 0.75, &value);
    assert_close(value, 1.35);
    stats_quantile_sorted(sorted, DATA_COUNT, 0.95, &value);
    assert_close(value, 2.1);
    stats_quantile_sorted(sorted, DATA_COUNT, 0.0, &value);
    assert_close(value, 0.3);
    stats_quantile_sorted(sorted, DATA_COUNT, 1.0, &value);
    assert_close(value, 2.3);
}

static void even_count(void **state)
{
    (void)state;
    double even[] = {7.0, 1.0, 4.0, 2.0};
    stats_summary summary;
    assert_int_equal(stats_summarise(even, 4, &summary), MITILOG_OK);
    assert_close(summary.median, 3.0);
    assert_close(summary.p75, 4.75);
    assert_close(summary.p95, 6.55);
    assert_close(summary.minimum, 1.0);
    assert_close(summary.maximum, 7.0);
    double one = 0.8;
    assert_int_equal(stats_summarise(&one, 1, &summary), MITILOG_OK);
    assert_close(summary.p95, 0.8);
    assert_int_equal(stats_summarise(even, 0, &summary), MITILOG_ERROR_INVALID);
    double value;
    assert_int_equal(stats_quantile_sorted(even, 4, 1.5, &value), MITILOG_ERROR_INVALID);
}

/* Robust z, worked by hand on the data above: median 1.0; absolute
 * deviations sorted 0,0.1,0.1,0.2,0.2,0.3,0.3,0.5,0.6,0.7,1.3 -> MAD 0.3;
 * z(2.5) = (2.5 - 1.0) / (1.4826 x 0.3) = 1.5 / 0.44478 = 3.37245...
 * z(2.3) = 1.3 / 0.44478 = 2.92279... (below 3, but above P95 = 2.1). */
static void robust_z_hand_worked(void **state)
{
    (void)state;
    double scratch[DATA_COUNT], median, mad, z;
    assert_int_equal(stats_mad(data, DATA_COUNT, scratch, &median, &mad), MITILOG_OK);
    assert_close(median, 1.0);
    assert_close(mad, 0.3);
    stats_robust_z(2.5, median, mad, &z);
    assert_close(z, 1.5 / (1.4826 * 0.3));
    assert_true(z > 3.3724 && z < 3.3725);

    double sorted[DATA_COUNT];
    memcpy(sorted, data, sizeof data);
    stats_sort(sorted, DATA_COUNT);
    stats_outlier outlier;
    stats_outlier_test(2.3, sorted, DATA_COUNT, scratch, 3.0, &outlier);
    assert_true(outlier.is_outlier);
    assert_false(outlier.above_robust_z);
    assert_true(outlier.above_p95);
    stats_outlier_test(2.0, sorted, DATA_COUNT, scratch, 3.0, &outlier);
    assert_false(outlier.is_outlier); /* z = 2.248, below P95 2.1 */
    stats_outlier_test(2.5, sorted, DATA_COUNT, scratch, 3.0, &outlier);
    assert_true(outlier.above_robust_z && outlier.above_p95);
}

/* A baseline of identical values has MAD 0: z is undefined and only the
 * P95 criterion decides (documented choice, common practice, no source). */
static void zero_mad_falls_back_on_p95(void **state)
{
    (void)state;
    double flat[] = {0.3, 0.3, 0.3, 0.3, 0.3};
    double scratch[5];
    stats_outlier outlier;
    stats_outlier_test(0.3, flat, 5, scratch, 3.0, &outlier);
    assert_false(outlier.is_outlier);
    assert_true(isnan(outlier.robust_z));
    stats_outlier_test(0.4, flat, 5, scratch, 3.0, &outlier);
    assert_true(outlier.is_outlier && outlier.above_p95 && !outlier.above_robust_z);
}

/* stats_sort against a reference: the values tagged with their position,
 * ordered by value then position (a stable sort's result, what glibc's
 * merge-sort qsort gives), compared bit for bit so that the order of equal
 * values (0.0 and -0.0 among them) counts. Sizes around the 16-value runs
 * and the merge widths; few distinct values, so most compare equal.
 * Common practice, no source. */
typedef struct tagged {
    double value;
    size_t position;
} tagged;

static int compare_tagged(const void *left, const void *right)
{
    const tagged *a = left, *b = right;
    if (a->value != b->value)
        return a->value < b->value ? -1 : 1;
    return (a->position > b->position) - (a->position < b->position);
}

static void sort_is_ascending_and_stable(void **state)
{
    (void)state;
    static const size_t sizes[] = {0, 1, 2, 15, 16, 17, 31, 32, 33, 100, 1000, 4099};
    uint64_t random_state = 12345;
    for (size_t s = 0; s < sizeof sizes / sizeof sizes[0]; s++) {
        size_t n = sizes[s];
        double *values = malloc((n + 1) * sizeof *values);
        tagged *reference = malloc((n + 1) * sizeof *reference);
        assert_non_null(values);
        assert_non_null(reference);
        for (size_t i = 0; i < n; i++) {
            random_state = random_state * 6364136223846793005u + 1442695040888963407u;
            unsigned pick = (unsigned)(random_state >> 33) % 23;
            values[i] = pick == 0 ? -0.0 : (double)((int)pick - 11) / 10.0;
            reference[i].value = values[i];
            reference[i].position = i;
        }
        stats_sort(values, n);
        qsort(reference, n, sizeof *reference, compare_tagged);
        for (size_t i = 0; i < n; i++) {
            if (memcmp(&values[i], &reference[i].value, sizeof values[i]) != 0)
                fail_msg("size %zu, position %zu: %g != %g", n, i, values[i], reference[i].value);
        }
        free(values);
        free(reference);
    }
}

/* stats_quantiles against sorting: the same numbers, bit for bit, for
 * sizes around the selection's cut-over, many equal values (zeros, as
 * dwell times have) and distinct ones; the type 7 quantiles of Python's
 * statistics module at the top of this file come out of stats_sort and
 * stats_quantile_sorted, so this ties the selection to them.
 * Common practice, no source. */
static void quantiles_select_as_sorting_does(void **state)
{
    (void)state;
    static const size_t sizes[] = {1, 2, 3, 16, 17, 40, 101, 1000, 5003};
    static const double p[] = {0.05, 0.25, 0.50, 0.75, 0.95, 0.999, 0.0, 1.0};
    enum { P = sizeof p / sizeof p[0] };
    uint64_t random_state = 987654321;
    for (int kind = 0; kind < 3; kind++) {
        for (size_t s = 0; s < sizeof sizes / sizeof sizes[0]; s++) {
            size_t n = sizes[s];
            double *values = malloc(n * sizeof *values), *sorted = malloc(n * sizeof *sorted);
            assert_non_null(values);
            assert_non_null(sorted);
            for (size_t i = 0; i < n; i++) {
                random_state = random_state * 6364136223846793005u + 1442695040888963407u;
                unsigned r = (unsigned)(random_state >> 33);
                values[i] = kind == 0   ? (r % 10 < 7 ? 0.0 : (double)(r % 50) / 10.0)
                            : kind == 1 ? (double)(r % 1000003) / 7.0
                                        : (double)(n - i); /* descending */
                sorted[i] = values[i];
            }
            stats_sort(sorted, n);
            double got[P], minimum, maximum;
            stats_quantiles(values, n, p, P, got, &minimum, &maximum);
            assert_memory_equal(&minimum, &sorted[0], sizeof minimum);
            assert_memory_equal(&maximum, &sorted[n - 1], sizeof maximum);
            for (size_t q = 0; q < P; q++) {
                double expected;
                assert_int_equal(stats_quantile_sorted(sorted, n, p[q], &expected), MITILOG_OK);
                if (memcmp(&got[q], &expected, sizeof expected) != 0)
                    fail_msg("kind %d, n %zu, p %g: %.17g != %.17g", kind, n, p[q], got[q],
                             expected);
            }
            free(values);
            free(sorted);
        }
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(quantiles_match_python_inclusive),
        cmocka_unit_test(sort_is_ascending_and_stable),
        cmocka_unit_test(quantiles_select_as_sorting_does),
        cmocka_unit_test(even_count),
        cmocka_unit_test(robust_z_hand_worked),
        cmocka_unit_test(zero_mad_falls_back_on_p95),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
