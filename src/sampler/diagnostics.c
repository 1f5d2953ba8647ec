/* Split R-hat, rank normalisation, folding, ESS by Geyer's initial monotone sequence and MCSEs,
 * following Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021), Bayesian Analysis 16(2):667.
 * Autocovariances come from GSL's radix-2 real FFT of the zero-padded chain. */
#include "sampler/diagnostics.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_fft_halfcomplex.h>
#include <gsl/gsl_fft_real.h>

#include "util/stats.h"

typedef struct {
    double v;
    size_t i;
} ranked;

struct tf_diag_workspace {
    size_t max_chains, max_iter;
    size_t fft_len;     /* a power of two >= 2 * (max_iter / 2): no circular wrap-around */
    double *raw;        /* max_chains * max_iter: the draws, chain after chain */
    double *sorted;     /* the same, sorted, for quantiles */
    double *split;      /* 2 max_chains split chains of max_iter / 2 */
    double *z;          /* a transformed copy of split */
    ranked *order;      /* for ranks */
    double *fft;        /* fft_len */
    double *acov;       /* max_iter / 2: mean over chains of s_m^2 rho_{t,m} */
    double *chain_mean; /* 2 max_chains */
    double *chain_var;  /* 2 max_chains */
};

void tf_diag_workspace_free(tf_diag_workspace *w)
{
    if (!w)
        return;
    free(w->raw);
    free(w->sorted);
    free(w->split);
    free(w->z);
    free(w->order);
    free(w->fft);
    free(w->acov);
    free(w->chain_mean);
    free(w->chain_var);
    free(w);
}

static size_t pow2_at_least(size_t n)
{
    size_t p = 1;
    while (p < n)
        p <<= 1;
    return p;
}

tf_status tf_diag_workspace_alloc(size_t max_chains, size_t max_iter, tf_diag_workspace **out, tf_error *err)
{
    *out = NULL;
    if (max_chains < 1 || max_iter < TF_DIAG_MIN_ITER)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "diagnostics need at least 1 chain of at least %d draws (asked for %zu of %zu)",
                            TF_DIAG_MIN_ITER, max_chains, max_iter);
    /* Sizes: S = chains * iter draws of up to sizeof(ranked) bytes each, and 2 * iter for the FFT. */
    if (max_chains > SIZE_MAX / 2 / max_iter || max_chains * max_iter > SIZE_MAX / sizeof(ranked) ||
        max_iter > SIZE_MAX / 4 / sizeof(double))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "diagnostics workspace too large (%zu x %zu)",
                            max_chains, max_iter);
    tf_diag_workspace *w = calloc(1, sizeof *w);
    if (!w)
        goto fail;
    size_t s = max_chains * max_iter, half = max_iter / 2;
    w->max_chains = max_chains;
    w->max_iter = max_iter;
    w->fft_len = pow2_at_least(2 * half);
    w->raw = malloc(s * sizeof *w->raw);
    w->sorted = malloc(s * sizeof *w->sorted);
    w->split = malloc(2 * max_chains * half * sizeof *w->split);
    w->z = malloc(2 * max_chains * half * sizeof *w->z);
    w->order = malloc(2 * max_chains * half * sizeof *w->order);
    w->fft = malloc(w->fft_len * sizeof *w->fft);
    w->acov = malloc(half * sizeof *w->acov);
    w->chain_mean = malloc(2 * max_chains * sizeof *w->chain_mean);
    w->chain_var = malloc(2 * max_chains * sizeof *w->chain_var);
    if (!w->raw || !w->sorted || !w->split || !w->z || !w->order || !w->fft || !w->acov || !w->chain_mean ||
        !w->chain_var)
        goto fail;
    *out = w;
    return TF_OK;
fail:
    tf_diag_workspace_free(w);
    return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for the diagnostics workspace");
}

/* Within-chain means and variances (divisor N - 1) of m chains of length N in x. */
static void chain_moments(tf_diag_workspace *w, const double *x, size_t m, size_t N)
{
    for (size_t j = 0; j < m; j++) {
        const double *c = x + j * N;
        double mean = 0, ss = 0;
        for (size_t i = 0; i < N; i++)
            mean += c[i];
        mean /= (double)N;
        for (size_t i = 0; i < N; i++)
            ss += (c[i] - mean) * (c[i] - mean);
        w->chain_mean[j] = mean;
        w->chain_var[j] = ss / (double)(N - 1);
    }
}

/* W (mean within-chain variance) and var+ = (N-1)/N W + B/N, B/N the variance of the chain
 * means (the paper's split-R-hat construction, after Gelman & Rubin 1992). */
static void variance_parts(const tf_diag_workspace *w, size_t m, size_t N, double *W, double *var_plus)
{
    double grand = 0, within = 0;
    for (size_t j = 0; j < m; j++) {
        grand += w->chain_mean[j];
        within += w->chain_var[j];
    }
    grand /= (double)m;
    within /= (double)m;
    double between = 0; /* B / N */
    for (size_t j = 0; j < m; j++)
        between += (w->chain_mean[j] - grand) * (w->chain_mean[j] - grand);
    between /= (double)(m - 1);
    *W = within;
    *var_plus = (double)(N - 1) / (double)N * within + between;
}

/* Split R-hat = sqrt(var+ / W) of m chains of length N in x. */
static double rhat_of(tf_diag_workspace *w, const double *x, size_t m, size_t N)
{
    chain_moments(w, x, m, N);
    double W, var_plus;
    variance_parts(w, m, N, &W, &var_plus);
    if (!(var_plus > 0))
        return NAN;
    return sqrt(var_plus / W);
}

/* ESS of m chains of length N in x. The combined autocorrelation at lag t is
 *   rho_t = 1 - (W - mean_m s_m^2 rho_{t,m}) / var+
 * with rho_{t,m} the usual (divisor N) autocorrelation of chain m; its autocovariances come from
 * one FFT per chain (Wiener-Khinchin: the inverse transform of |FFT|^2 of the zero-padded,
 * centred chain). Pairs P_k = rho_2k + rho_2k+1 are summed while positive and forced to be
 * non-increasing (Geyer 1992, Statistical Science 7(4):473, initial monotone sequence);
 * tau = -1 + 2 sum P_k and ESS = m N / tau. */
static double ess_of(tf_diag_workspace *w, const double *x, size_t m, size_t N)
{
    size_t L = pow2_at_least(2 * N);
    double *f = w->fft;
    memset(w->acov, 0, N * sizeof *w->acov);
    chain_moments(w, x, m, N);
    for (size_t j = 0; j < m; j++) {
        const double *c = x + j * N;
        for (size_t i = 0; i < N; i++)
            f[i] = c[i] - w->chain_mean[j];
        memset(f + N, 0, (L - N) * sizeof *f);
        if (gsl_fft_real_radix2_transform(f, 1, L) != GSL_SUCCESS)
            return NAN;
        /* Half-complex layout: f[k] = Re z_k for k <= L/2, f[L-k] = Im z_k for 0 < k < L/2. */
        f[0] *= f[0];
        f[L / 2] *= f[L / 2];
        for (size_t k = 1; k < L / 2; k++) {
            f[k] = f[k] * f[k] + f[L - k] * f[L - k];
            f[L - k] = 0;
        }
        if (gsl_fft_halfcomplex_radix2_inverse(f, 1, L) != GSL_SUCCESS)
            return NAN;
        /* f[t] = sum_i d_i d_{i+t}; s_m^2 rho_{t,m} = f[t] / (N - 1). */
        for (size_t t = 0; t < N; t++)
            w->acov[t] += f[t] / (double)(N - 1) / (double)m;
    }
    double W, var_plus;
    variance_parts(w, m, N, &W, &var_plus);
    if (!(var_plus > 0))
        return NAN;
    double tau = -1, prev = INFINITY;
    for (size_t k = 0; 2 * k + 1 < N; k++) {
        double rho_even = 1 - (W - w->acov[2 * k]) / var_plus;
        double rho_odd = 1 - (W - w->acov[2 * k + 1]) / var_plus;
        double P = rho_even + rho_odd;
        if (!(P > 0))
            break;
        if (P > prev)
            P = prev;
        tau += 2 * P;
        prev = P;
    }
    double S = (double)(m * N);
    /* Our safeguard: for antithetic chains the truncated sum can come out near zero (or below),
     * which a finite run cannot support; ESS is bounded by S log10 S. */
    double cap = S * log10(S);
    return tau > 0 ? fmin(S / tau, cap) : cap;
}

static int cmp_ranked(const void *a, const void *b)
{
    double x = ((const ranked *)a)->v, y = ((const ranked *)b)->v;
    return (x > y) - (x < y);
}

/* z_i = Phi^-1((r_i - 3/8) / (S + 1/4)), r_i the rank of x_i among all S values (ties get
 * their average rank): the paper's rank normalisation, with Blom's (1958) offsets. */
static void rank_normalise(tf_diag_workspace *w, const double *x, double *z, size_t S)
{
    for (size_t i = 0; i < S; i++) {
        w->order[i].v = x[i];
        w->order[i].i = i;
    }
    qsort(w->order, S, sizeof *w->order, cmp_ranked);
    for (size_t i = 0; i < S;) {
        size_t j = i;
        while (j + 1 < S && w->order[j + 1].v == w->order[i].v)
            j++;
        double r = 0.5 * (double)(i + j) + 1; /* average of the 1-based ranks i+1 .. j+1 */
        double zr = gsl_cdf_ugaussian_Pinv((r - 0.375) / ((double)S + 0.25));
        for (size_t k = i; k <= j; k++)
            z[w->order[k].i] = zr;
        i = j + 1;
    }
}

/* ESS of the indicator I(x <= q) over the split chains. */
static double ess_indicator(tf_diag_workspace *w, size_t S, size_t m, size_t N, double q)
{
    for (size_t i = 0; i < S; i++)
        w->z[i] = w->split[i] <= q ? 1.0 : 0.0;
    return ess_of(w, w->z, m, N);
}

/* The beta distribution's quantile at P by bisection on gsl_cdf_beta_P: GSL's own
 * gsl_cdf_beta_Pinv fails (NaN) for some large shape parameters, e.g. a = 401, b = 7601, which
 * an indicator ESS of 8000 produces. 64 halvings of [0, 1] reach double precision. */
static double beta_quantile(double P, double a, double b)
{
    double lo = 0, hi = 1;
    for (int i = 0; i < 64 && hi - lo > 1e-15; i++) {
        double mid = 0.5 * (lo + hi);
        double c = gsl_cdf_beta_P(mid, a, b);
        if (!isfinite(c))
            return NAN;
        if (c < P)
            lo = mid;
        else
            hi = mid;
    }
    return 0.5 * (lo + hi);
}

/* MCSE of the p-quantile. With e the ESS of I(x <= q_p), the rank of the quantile is
 * uncertain like a Beta(e p + 1, e (1 - p) + 1) probability; the draws' quantiles at its
 * 15.87 % and 84.13 % points (one normal sd either side) are half an MCSE interval apart
 * (Vehtari et al. 2021, Monte Carlo error of quantiles). */
static double mcse_quantile(tf_diag_workspace *w, size_t S_all, size_t S, size_t m, size_t N, double p,
                            double q, double *ess_out)
{
    double e = ess_indicator(w, S, m, N, q);
    if (ess_out)
        *ess_out = e;
    if (!isfinite(e))
        return NAN;
    double a = e * p + 1, b = e * (1 - p) + 1;
    double lo = beta_quantile(0.15865525393145707, a, b); /* Phi(-1) */
    double hi = beta_quantile(0.84134474606854293, a, b); /* Phi(1) */
    if (!isfinite(lo) || !isfinite(hi))
        return NAN;
    return 0.5 * (tf_stats_quantile_sorted(w->sorted, S_all, hi) - tf_stats_quantile_sorted(w->sorted, S_all, lo));
}

static void set_nan(tf_diag_summary *out, size_t n_chains, size_t n_iter)
{
    out->n_chains = n_chains;
    out->n_iter = n_iter;
    out->mean = out->sd = out->q05 = out->q50 = out->q95 = NAN;
    out->rhat = out->rhat_bulk = out->rhat_folded = NAN;
    out->ess_bulk = out->ess_tail = out->ess_mean = NAN;
    out->mcse_mean = out->mcse_q05 = out->mcse_q50 = out->mcse_q95 = NAN;
}

tf_status tf_diag_summarise(tf_diag_workspace *w, const double *const *chains, size_t n_chains, size_t n_iter,
                            size_t stride, tf_diag_summary *out, tf_error *err)
{
    set_nan(out, n_chains, n_iter);
    if (n_chains < 1 || n_iter < TF_DIAG_MIN_ITER || stride < 1)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "diagnostics need at least 1 chain of at least %d draws (got %zu of %zu, stride %zu)",
                            TF_DIAG_MIN_ITER, n_chains, n_iter, stride);
    if (n_chains > w->max_chains || n_iter > w->max_iter)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "%zu chains of %zu draws exceed the diagnostics workspace (%zu of %zu)", n_chains,
                            n_iter, w->max_chains, w->max_iter);
    for (size_t c = 0; c < n_chains; c++)
        for (size_t i = 0; i < n_iter; i++) {
            double v = chains[c][i * stride];
            if (!isfinite(v))
                return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                                    "draw %zu of chain %zu is not a finite number", i + 1, c + 1);
            w->raw[c * n_iter + i] = v;
        }

    /* Split each chain into halves; with an odd length the middle draw belongs to neither. */
    size_t N = n_iter / 2, m = 2 * n_chains, S = m * N, S_all = n_chains * n_iter;
    for (size_t c = 0; c < n_chains; c++) {
        memcpy(w->split + (2 * c) * N, w->raw + c * n_iter, N * sizeof *w->split);
        memcpy(w->split + (2 * c + 1) * N, w->raw + c * n_iter + (n_iter - N), N * sizeof *w->split);
    }

    double sum = 0, ss = 0;
    for (size_t i = 0; i < S_all; i++)
        sum += w->raw[i];
    out->mean = sum / (double)S_all;
    for (size_t i = 0; i < S_all; i++)
        ss += (w->raw[i] - out->mean) * (w->raw[i] - out->mean);
    out->sd = sqrt(ss / (double)(S_all - 1));
    memcpy(w->sorted, w->raw, S_all * sizeof *w->sorted);
    tf_stats_sort(w->sorted, S_all);
    out->q05 = tf_stats_quantile_sorted(w->sorted, S_all, 0.05);
    out->q50 = tf_stats_quantile_sorted(w->sorted, S_all, 0.5);
    out->q95 = tf_stats_quantile_sorted(w->sorted, S_all, 0.95);

    /* Bulk: rank-normalised split chains. */
    rank_normalise(w, w->split, w->z, S);
    out->rhat_bulk = rhat_of(w, w->z, m, N);
    out->ess_bulk = ess_of(w, w->z, m, N);

    /* Folded about the median of the split draws, then rank-normalised: R-hat of the scale. */
    memcpy(w->z, w->split, S * sizeof *w->z);
    tf_stats_sort(w->z, S);
    double median = tf_stats_quantile_sorted(w->z, S, 0.5);
    for (size_t i = 0; i < S; i++)
        w->z[i] = fabs(w->split[i] - median);
    rank_normalise(w, w->z, w->z, S);
    out->rhat_folded = rhat_of(w, w->z, m, N);
    out->rhat = fmax(out->rhat_bulk, out->rhat_folded);
    if (isnan(out->rhat_bulk) || isnan(out->rhat_folded))
        out->rhat = NAN;

    out->ess_mean = ess_of(w, w->split, m, N);
    out->mcse_mean = out->sd / sqrt(out->ess_mean);

    double e05, e95;
    out->mcse_q05 = mcse_quantile(w, S_all, S, m, N, 0.05, out->q05, &e05);
    out->mcse_q50 = mcse_quantile(w, S_all, S, m, N, 0.5, out->q50, NULL);
    out->mcse_q95 = mcse_quantile(w, S_all, S, m, N, 0.95, out->q95, &e95);
    out->ess_tail = fmin(e05, e95);
    if (isnan(e05) || isnan(e95))
        out->ess_tail = NAN;
    return TF_OK;
}
