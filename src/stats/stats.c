#include "stats/stats.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static int compare_doubles(const void *left, const void *right)
{
    double a = *(const double *)left, b = *(const double *)right;
    return (a > b) - (a < b);
}

/* Stable insertion sort of a short run. */
static void insertion_sort(double *values, size_t count)
{
    for (size_t i = 1; i < count; i++) {
        double value = values[i];
        size_t j = i;
        while (j > 0 && values[j - 1] > value) {
            values[j] = values[j - 1];
            j--;
        }
        values[j] = value;
    }
}

enum { SORT_RUN = 16 };

/* Ascending and stable (equal values keep their order, as with glibc's
 * merge-sort qsort, so results do not depend on the sort used): sorted
 * runs of SORT_RUN, then bottom-up merges through a scratch buffer. The
 * comparisons are inline, which is what makes the period statistics'
 * many sorts cheap. */
void stats_sort(double *values, size_t count)
{
    if (count <= SORT_RUN) {
        insertion_sort(values, count);
        return;
    }
    double *scratch = malloc(count * sizeof *scratch);
    if (scratch == NULL) {
        qsort(values, count, sizeof *values, compare_doubles);
        return;
    }
    for (size_t start = 0; start < count; start += SORT_RUN)
        insertion_sort(values + start, count - start < SORT_RUN ? count - start : SORT_RUN);
    double *from = values, *to = scratch;
    for (size_t width = SORT_RUN; width < count; width *= 2) {
        for (size_t left = 0; left < count; left += 2 * width) {
            size_t middle = left + width < count ? left + width : count;
            size_t right = middle + width < count ? middle + width : count;
            size_t i = left, j = middle, k = left;
            while (i < middle && j < right)
                to[k++] = from[j] < from[i] ? from[j++] : from[i++];
            while (i < middle)
                to[k++] = from[i++];
            while (j < right)
                to[k++] = from[j++];
        }
        double *swap = from;
        from = to;
        to = swap;
    }
    if (from != values)
        memcpy(values, from, count * sizeof *values);
    free(scratch);
}

static void swap_values(double *values, size_t a, size_t b)
{
    double value = values[a];
    values[a] = values[b];
    values[b] = value;
}

/* Puts the values of the given ranks (0-based, ascending, within
 * [low, high)) of values[low..high) at those positions, every value before
 * a placed one smaller or equal and every one after it greater or equal:
 * quickselect for several ranks at once (each partition sends the ranks to
 * the side that holds them), median-of-three pivot, three-way partition
 * (many equal values, as the zeros of dwell times, cost one pass). Deeper
 * than 64 partitions it sorts what is left, so the worst case stays
 * n log n. */
static void select_ranks(double *values, size_t low, size_t high, const size_t *ranks,
                         size_t rank_count, int depth)
{
    while (rank_count > 0) {
        if (high - low <= SORT_RUN) {
            insertion_sort(values + low, high - low);
            return;
        }
        if (depth > 64) {
            stats_sort(values + low, high - low);
            return;
        }
        double a = values[low], b = values[low + (high - low) / 2], c = values[high - 1];
        double pivot = a < b ? (b < c ? b : (a < c ? c : a)) : (a < c ? a : (b < c ? c : b));
        size_t less = low, at = low, greater = high;
        while (at < greater) {
            if (values[at] < pivot)
                swap_values(values, less++, at++);
            else if (values[at] > pivot)
                swap_values(values, at, --greater);
            else
                at++;
        }
        /* ranks below less go left, from greater on go right, between
         * them they are placed (equal to the pivot) */
        size_t left = 0;
        while (left < rank_count && ranks[left] < less)
            left++;
        size_t right = left;
        while (right < rank_count && ranks[right] < greater)
            right++;
        depth++;
        select_ranks(values, low, less, ranks, left, depth);
        ranks += right;
        rank_count -= right;
        low = greater;
    }
}

void stats_quantiles(double *values, size_t n, const double *p, size_t count, double *out,
                     double *minimum, double *maximum)
{
    /* The ranks the quantiles read (floor h and the next), ascending. */
    enum { MOST = 32 };
    size_t ranks[2 * MOST + 2], rank_count = 0;
    if (n == 0 || count > MOST)
        return;
    ranks[rank_count++] = 0;
    ranks[rank_count++] = n - 1;
    for (size_t q = 0; q < count; q++) {
        size_t low = (size_t)floor((double)(n - 1) * p[q]);
        ranks[rank_count++] = low < n - 1 ? low : n - 1;
        ranks[rank_count++] = low + 1 < n ? low + 1 : n - 1;
    }
    for (size_t i = 1; i < rank_count; i++) {
        size_t rank = ranks[i], j = i;
        while (j > 0 && ranks[j - 1] > rank) {
            ranks[j] = ranks[j - 1];
            j--;
        }
        ranks[j] = rank;
    }
    size_t distinct = 0;
    for (size_t i = 0; i < rank_count; i++) {
        if (distinct == 0 || ranks[i] != ranks[distinct - 1])
            ranks[distinct++] = ranks[i];
    }
    select_ranks(values, 0, n, ranks, distinct, 0);
    if (minimum != NULL)
        *minimum = values[0];
    if (maximum != NULL)
        *maximum = values[n - 1];
    for (size_t q = 0; q < count; q++)
        stats_quantile_sorted(values, n, p[q], &out[q]);
}

mitilog_status stats_quantile_sorted(const double *sorted, size_t count, double p, double *out)
{
    if (count == 0 || !(p >= 0.0 && p <= 1.0))
        return MITILOG_ERROR_INVALID;
    double h = (double)(count - 1) * p;
    size_t low = (size_t)floor(h);
    if (low >= count - 1) {
        *out = sorted[count - 1];
        return MITILOG_OK;
    }
    double fraction = h - (double)low;
    *out = sorted[low] + fraction * (sorted[low + 1] - sorted[low]);
    return MITILOG_OK;
}

mitilog_status stats_median_sorted(const double *sorted, size_t count, double *out)
{
    return stats_quantile_sorted(sorted, count, 0.5, out);
}

mitilog_status stats_mad(const double *values, size_t count, double *scratch, double *median,
                         double *mad)
{
    if (count == 0)
        return MITILOG_ERROR_INVALID;
    memcpy(scratch, values, count * sizeof *scratch);
    stats_sort(scratch, count);
    stats_median_sorted(scratch, count, median);
    for (size_t i = 0; i < count; i++)
        scratch[i] = fabs(values[i] - *median);
    stats_sort(scratch, count);
    return stats_median_sorted(scratch, count, mad);
}

mitilog_status stats_robust_z(double x, double median, double mad, double *out)
{
    if (!(mad > 0.0))
        return MITILOG_ERROR_INVALID;
    *out = (x - median) / (STATS_MAD_SCALE * mad);
    return MITILOG_OK;
}

mitilog_status stats_summarise(double *values, size_t count, stats_summary *summary)
{
    memset(summary, 0, sizeof *summary);
    if (count == 0)
        return MITILOG_ERROR_INVALID;
    stats_sort(values, count);
    summary->count = count;
    summary->minimum = values[0];
    summary->maximum = values[count - 1];
    stats_quantile_sorted(values, count, 0.5, &summary->median);
    stats_quantile_sorted(values, count, 0.75, &summary->p75);
    stats_quantile_sorted(values, count, 0.95, &summary->p95);
    return MITILOG_OK;
}

mitilog_status stats_outlier_test(double x, const double *baseline_sorted, size_t baseline_count,
                                  double *scratch, double z_limit, stats_outlier *result)
{
    memset(result, 0, sizeof *result);
    result->robust_z = NAN;
    if (baseline_count == 0)
        return MITILOG_ERROR_INVALID;
    if (z_limit <= 0)
        z_limit = 3.0;
    stats_mad(baseline_sorted, baseline_count, scratch, &result->baseline_median,
              &result->baseline_mad);
    stats_quantile_sorted(baseline_sorted, baseline_count, 0.95, &result->baseline_p95);
    double z;
    if (stats_robust_z(x, result->baseline_median, result->baseline_mad, &z) == MITILOG_OK) {
        result->robust_z = z;
        result->above_robust_z = z > z_limit;
    }
    result->above_p95 = x > result->baseline_p95;
    result->is_outlier = result->above_robust_z || result->above_p95;
    return MITILOG_OK;
}
