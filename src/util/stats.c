/* Order statistics of doubles; see stats.h. */
#include "util/stats.h"

#include <math.h>

#include <gsl/gsl_statistics_double.h>
#include <stdlib.h>

int tf_stats_cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

void tf_stats_sort(double *x, size_t n)
{
    qsort(x, n, sizeof *x, tf_stats_cmp_double);
}

double tf_stats_quantile_sorted(const double *x, size_t n, double p)
{
    return gsl_stats_quantile_from_sorted_data(x, 1, n, p);
}

double tf_stats_median(double *x, size_t n)
{
    tf_stats_sort(x, n);
    return gsl_stats_median_from_sorted_data(x, 1, n);
}

double tf_stats_slope(const double *y, size_t n, size_t stride)
{
    if (n < 2)
        return NAN;
    double m = 0.5 * (double)(n - 1), ybar = 0, sxy = 0, sxx = 0;
    for (size_t i = 0; i < n; i++)
        ybar += y[i * stride];
    ybar /= (double)n;
    for (size_t i = 0; i < n; i++) {
        double dx = (double)i - m;
        sxy += dx * (y[i * stride] - ybar);
        sxx += dx * dx;
    }
    return sxy / sxx;
}
