/* Order statistics of arrays of doubles: the one comparison for sorting them, and the median and
 * quantiles of sorted data by GSL (Hyndman & Fan 1996, The American Statistician 50(4):361,
 * definition 7: linear interpolation between order statistics at (n - 1) p). */
#ifndef TF_STATS_H
#define TF_STATS_H

#include <stddef.h>

/* qsort comparison of two doubles: ascending, equal values equal. NaN compares equal to
 * everything, so arrays holding NaN have no defined order: callers drop or replace NaN first. */
int tf_stats_cmp_double(const void *a, const void *b);

/* Sorts x[0..n) ascending in place (qsort with tf_stats_cmp_double). */
void tf_stats_sort(double *x, size_t n);

/* Quantile at probability p in [0, 1] of the ascending x[0..n), n >= 1:
 * gsl_stats_quantile_from_sorted_data. */
double tf_stats_quantile_sorted(const double *x, size_t n, double p);

/* Median of x[0..n), n >= 1: sorts x in place, then gsl_stats_median_from_sorted_data (the
 * middle value, or the mean of the two middle ones). */
double tf_stats_median(double *x, size_t n);

/* The least-squares slope of y[i * stride] on i, i = 0..n-1, n >= 2: sum (i - m)(y_i - ybar) /
 * sum (i - m)^2 with m = (n - 1) / 2 (ordinary least squares, e.g. Draper & Smith 1998, Applied
 * Regression Analysis, eq. 1.2.9). NaN when n < 2. */
double tf_stats_slope(const double *y, size_t n, size_t stride);

#endif
