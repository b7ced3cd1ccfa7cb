/*
 * stats.h - descriptive statistics for exposure: order statistics with
 * the 'inclusive' method (Hyndman & Fan 1996 type 7: R's quantile type 7,
 * Python's statistics.quantiles(method='inclusive')), the median, the
 * median absolute deviation and the robust z-score used for outliers.
 *
 * Pure computation on caller-owned arrays. Functions that sort take a
 * scratch copy the caller provides or sort in place as documented.
 */
#ifndef MITILOG_STATS_H
#define MITILOG_STATS_H

#include <stddef.h>

#include "util/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The consistency constant that makes MAD estimate the standard deviation
 * of a normal distribution: 1 / Phi^-1(3/4) = 1.4826 (to 4 places). */
#define STATS_MAD_SCALE 1.4826

/* Sorts values ascending in place (NaN not allowed). */
void stats_sort(double *values, size_t count);

/* Quantile p in [0, 1] of ascending sorted values, type 7:
 * h = (n - 1) p; x[floor h] + (h - floor h)(x[floor h + 1] - x[floor h]).
 * MITILOG_ERROR_INVALID if count == 0 or p is outside [0, 1]. */
mitilog_status stats_quantile_sorted(const double *sorted, size_t count, double p, double *out);

/* The type 7 quantiles p[0..count) (each in [0, 1]) of values[0..n),
 * n > 0, into out[], and the minimum and maximum when not NULL: the same
 * numbers as stats_quantile_sorted() on the sorted values, found by
 * selecting only the order statistics they use (expected linear time
 * rather than a full sort). values is reordered. */
void stats_quantiles(double *values, size_t n, const double *p, size_t count, double *out,
                     double *minimum, double *maximum);

/* Median of ascending sorted values (the type 7 quantile at 0.5, which
 * is the usual median: middle value, or the mean of the two middle). */
mitilog_status stats_median_sorted(const double *sorted, size_t count, double *out);

/* Median absolute deviation from the median (unscaled). scratch must hold
 * count doubles; values need not be sorted and are not changed. */
mitilog_status stats_mad(const double *values, size_t count, double *scratch, double *median,
                         double *mad);

/* Robust z-score (x - median) / (STATS_MAD_SCALE x mad). When mad == 0
 * the score is undefined: returns MITILOG_ERROR_INVALID and leaves *out
 * unchanged, so callers fall back on the percentile criterion. */
mitilog_status stats_robust_z(double x, double median, double mad, double *out);

typedef struct stats_summary {
    size_t count;
    double minimum, median, p75, p95, maximum;
} stats_summary;

/* Sorts values in place and fills the summary; count == 0 gives a
 * summary with count 0 and MITILOG_ERROR_INVALID. */
mitilog_status stats_summarise(double *values, size_t count, stats_summary *summary);

/* The outlier rule of docs/domain.md: x is an outlier against a
 * baseline when its robust z exceeds z_limit (default 3) or x exceeds the
 * baseline's P95. baseline_sorted must be ascending. *robust_z is set to
 * the score, or NAN when the baseline's MAD is 0. */
typedef struct stats_outlier {
    int is_outlier;
    int above_robust_z;
    int above_p95;
    double robust_z;
    double baseline_median, baseline_mad, baseline_p95;
} stats_outlier;

mitilog_status stats_outlier_test(double x, const double *baseline_sorted, size_t baseline_count,
                                  double *scratch, double z_limit, stats_outlier *result);

#ifdef __cplusplus
}
#endif

#endif
