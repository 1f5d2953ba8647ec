/* Generalized Pareto fit by Zhang & Stephens (2009) and the Pareto-k of importance weights. */
#include "compare/pareto.h"

#include <math.h>
#include <stdlib.h>

#include "util/stats.h"

/* The grid size of Zhang & Stephens (2009, section 3): m = 30 + floor(sqrt(n)) points. */
#define ZS_GRID_MIN 30
/* Their prior for theta puts the grid's quartile-based scale at 1 / (3 x*), x* the first
 * quartile of the sample (Zhang & Stephens 2009, eq. 9 and the text after it). */
#define ZS_PRIOR 3.0
/* The weakly informative prior of Vehtari et al. on k: n k / (n + a) + a k0 / (n + a) with
 * a = 10 pseudo-observations at k0 = 0.5 (recalled from memory). */
#define PRIOR_N 10.0
#define PRIOR_K 0.5

/* Profile log-likelihood per observation at theta, Zhang & Stephens (2009, eq. 6):
 * k(theta) = -mean(log(1 - theta x)), l(theta) = log(theta / k) + k - 1, written here with
 * the tail index xi = -k as log(-theta / xi) - xi - 1. */
static double profile(const double *x, size_t n, double theta, double *xi_out)
{
    double s = 0;
    for (size_t i = 0; i < n; i++)
        s += log1p(-theta * x[i]);
    double xi = s / (double)n;
    *xi_out = xi;
    double r = -theta / xi;
    return r > 0 ? log(r) - xi - 1.0 : -INFINITY;
}

void tf_pareto_fit(const double *x, size_t n, double *work, double *k, double *sigma)
{
    *k = NAN;
    *sigma = NAN;
    if (n < TF_PARETO_MIN_TAIL)
        return;
    for (size_t i = 0; i < n; i++) {
        if (!(x[i] >= 0) || !(x[i] < INFINITY))
            return;
        work[i] = x[i];
    }
    tf_stats_sort(work, n);
    const double x_max = work[n - 1];
    /* First quartile, the order statistic floor(n / 4 + 0.5) (1-based). */
    const double x_star = work[(size_t)floor((double)n / 4.0 + 0.5) - 1];
    if (!(x_max > 0) || !(x_star > 0))
        return;
    const size_t m = ZS_GRID_MIN + (size_t)floor(sqrt((double)n));
    /* Posterior-mean theta over the grid theta_j = 1/x_(n) + (1 - sqrt(m / (j - 1/2))) / (3 x*)
     * with weights proportional to exp(n l(theta_j)) (Zhang & Stephens 2009, eqs. 8-10), summed
     * in two passes so that no grid needs storing: the first finds the largest log-weight. */
    double l_max = -INFINITY;
    for (size_t j = 1; j <= m; j++) {
        double theta = 1.0 / x_max + (1.0 - sqrt((double)m / ((double)j - 0.5))) / (ZS_PRIOR * x_star), xi;
        double l = (double)n * profile(work, n, theta, &xi);
        if (l > l_max)
            l_max = l;
    }
    if (!(l_max > -INFINITY))
        return;
    double sw = 0, swt = 0;
    for (size_t j = 1; j <= m; j++) {
        double theta = 1.0 / x_max + (1.0 - sqrt((double)m / ((double)j - 0.5))) / (ZS_PRIOR * x_star), xi;
        double w = exp((double)n * profile(work, n, theta, &xi) - l_max);
        sw += w;
        swt += w * theta;
    }
    double theta_hat = swt / sw, xi;
    profile(work, n, theta_hat, &xi);
    if (!isfinite(xi) || theta_hat == 0)
        return;
    *sigma = -xi / theta_hat;
    *k = ((double)n * xi + PRIOR_N * PRIOR_K) / ((double)n + PRIOR_N);
}

size_t tf_pareto_tail_size(size_t n_draws)
{
    double a = (double)n_draws / 5.0, b = 3.0 * sqrt((double)n_draws);
    return (size_t)floor(a < b ? a : b);
}

tf_status tf_pareto_k(const double *log_w, size_t n, double *k, size_t *n_tail, tf_error *err)
{
    *k = NAN;
    size_t m = tf_pareto_tail_size(n);
    *n_tail = m;
    if (m < TF_PARETO_MIN_TAIL || m + 1 > n)
        return TF_OK;
    double *buf = malloc(2 * n * sizeof *buf);
    if (!buf)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for %zu importance weights", n);
    double *sorted = buf, *work = buf + n;
    for (size_t i = 0; i < n; i++)
        sorted[i] = isnan(log_w[i]) ? -INFINITY : log_w[i];
    tf_stats_sort(sorted, n);
    double top = sorted[n - 1], cut = sorted[n - m - 1];
    if (top > -INFINITY && cut > -INFINITY && top < INFINITY) {
        /* Exceedances of the (m+1)-th largest weight, scaled by the largest (the fit is
         * scale-free) so that nothing overflows. */
        double u = exp(cut - top);
        for (size_t i = 0; i < m; i++)
            sorted[i] = exp(sorted[n - m + i] - top) - u;
        double sigma;
        tf_pareto_fit(sorted, m, work, k, &sigma);
    }
    free(buf);
    return TF_OK;
}
