/* Storage and summaries of one PMMH fit; see fit.h. */
#include "sampler/fit.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "sampler/diagnostics.h"
#include "util/stats.h"

struct tf_fit {
    const tf_model *model;
    const tf_posterior *post;
    const tf_series *series;
    size_t n_chains, n_iter, n_params, n_years;
    size_t cap;        /* draws stored per chain; the first n_iter of each chain are kept draws */
    double *draws;     /* [chain][iter][param] */
    double *loglik;    /* [chain][iter] */
    double *paths;     /* [chain][iter][year] */
    double *acceptance, *invalid;   /* [chain] */
    tf_fit_settings settings;
    tf_fit_param_summary *params;
    tf_fit_year_summary *years;
    tf_fit_trend_summary trend, recent;
    size_t recent_years;   /* 0: TF_FIT_RECENT_YEARS */
    int summarised;
};

void tf_fit_free(tf_fit *f)
{
    if (!f)
        return;
    free(f->draws);
    free(f->loglik);
    free(f->paths);
    free(f->acceptance);
    free(f->invalid);
    free(f->params);
    free(f->years);
    free(f);
}

tf_fit *tf_fit_alloc(const tf_model *m, const tf_series *s, size_t n_chains, size_t n_iter)
{
    if (!m || !s || n_chains == 0 || n_chains > TF_FIT_MAX_CHAINS || n_iter == 0)
        return NULL;
    size_t n_params = tf_model_n_params(m), n_years = tf_series_n_years(s);
    size_t n_draws = n_chains * n_iter;
    if (n_draws / n_chains != n_iter || n_draws > SIZE_MAX / sizeof(double) / (n_years + n_params))
        return NULL;
    tf_fit *f = calloc(1, sizeof *f);
    if (!f)
        return NULL;
    f->model = m;
    f->series = s;
    f->n_chains = n_chains;
    f->n_iter = n_iter;
    f->cap = n_iter;
    f->n_params = n_params;
    f->n_years = n_years;
    f->draws = malloc(n_draws * n_params * sizeof(double));
    f->loglik = malloc(n_draws * sizeof(double));
    f->paths = malloc(n_draws * n_years * sizeof(double));
    f->acceptance = calloc(n_chains, sizeof(double));
    f->invalid = calloc(n_chains, sizeof(double));
    f->params = calloc(n_params, sizeof *f->params);
    f->years = calloc(n_years, sizeof *f->years);
    if (!f->draws || !f->loglik || !f->paths || !f->acceptance || !f->invalid || !f->params ||
        !f->years)
        goto fail;
    for (size_t i = 0; i < n_draws * n_years; i++)
        f->paths[i] = NAN;
    for (size_t i = 0; i < n_draws * n_params; i++)
        f->draws[i] = NAN;
    for (size_t i = 0; i < n_draws; i++)
        f->loglik[i] = NAN;
    return f;
fail:
    tf_fit_free(f);
    return NULL;
}

void tf_fit_record(tf_fit *f, size_t chain, size_t iter, const double *theta, double loglik,
                   const double *path)
{
    size_t k = chain * f->cap + iter;
    memcpy(f->draws + k * f->n_params, theta, f->n_params * sizeof(double));
    f->loglik[k] = loglik;
    if (path)
        memcpy(f->paths + k * f->n_years, path, f->n_years * sizeof(double));
}

size_t tf_fit_halve(tf_fit *f)
{
    size_t h = f->n_iter / 2;
    for (size_t c = 0; c < f->n_chains; c++)
        for (size_t i = 0; i < h; i++) {
            size_t to = c * f->cap + i, from = c * f->cap + 2 * i + 1;
            memcpy(f->draws + to * f->n_params, f->draws + from * f->n_params, f->n_params * sizeof(double));
            f->loglik[to] = f->loglik[from];
            memcpy(f->paths + to * f->n_years, f->paths + from * f->n_years, f->n_years * sizeof(double));
        }
    f->n_iter = h;
    f->summarised = 0;
    return h;
}

void tf_fit_set_n_iter(tf_fit *f, size_t n_iter)
{
    f->n_iter = n_iter < f->cap ? n_iter : f->cap;
    f->summarised = 0;
}

void tf_fit_compact(tf_fit *f)
{
    if (f->n_iter == f->cap)
        return;
    /* Chain c moves from c * cap to c * n_iter <= c * cap: in chain order nothing is overwritten
     * before it has moved (memmove handles the overlap within one chain). */
    for (size_t c = 1; c < f->n_chains; c++) {
        memmove(f->draws + c * f->n_iter * f->n_params, f->draws + c * f->cap * f->n_params,
                f->n_iter * f->n_params * sizeof(double));
        memmove(f->loglik + c * f->n_iter, f->loglik + c * f->cap, f->n_iter * sizeof(double));
        memmove(f->paths + c * f->n_iter * f->n_years, f->paths + c * f->cap * f->n_years,
                f->n_iter * f->n_years * sizeof(double));
    }
    f->cap = f->n_iter;
    /* Give the unused tail back; a failed shrink leaves the larger block, which is as good. */
    size_t n_draws = f->n_chains * f->n_iter;
    double *p;
    if ((p = realloc(f->draws, n_draws * f->n_params * sizeof(double))))
        f->draws = p;
    if ((p = realloc(f->loglik, n_draws * sizeof(double))))
        f->loglik = p;
    if ((p = realloc(f->paths, n_draws * f->n_years * sizeof(double))))
        f->paths = p;
}

/* Storage index of draw k = chain * n_iter + iter of the chain-major order. */
static size_t at(const tf_fit *f, size_t k)
{
    return (k / f->n_iter) * f->cap + k % f->n_iter;
}

void tf_fit_set_chain_stats(tf_fit *f, size_t chain, double acceptance, double invalid)
{
    f->acceptance[chain] = acceptance;
    f->invalid[chain] = invalid;
}

void tf_fit_set_settings(tf_fit *f, const tf_fit_settings *st) { f->settings = *st; }
void tf_fit_set_posterior(tf_fit *f, const tf_posterior *post) { f->post = post; }

/* Mean and sd of x[0..n), then sorts x in place and writes three quantiles (GSL's linear
 * interpolation between order statistics, Hyndman & Fan 1996 type 7). */
static void moments_and_quantiles(double *x, size_t n, double *mean, double *sd, const double *p,
                                  double *q, size_t n_q)
{
    if (mean)
        *mean = gsl_stats_mean(x, 1, n);
    if (sd)
        *sd = n > 1 ? gsl_stats_sd(x, 1, n) : NAN;
    gsl_sort(x, 1, n);
    for (size_t i = 0; i < n_q; i++)
        q[i] = gsl_stats_quantile_from_sorted_data(x, 1, n, p[i]);
}

static int all_finite(const double *x, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (!isfinite(x[i]))
            return 0;
    return 1;
}

/* R-hat and ESS of one quantity stored with the given stride in chain-major blocks of
 * chain_len * stride values starting at base, the first n_iter of each block being the draws:
 * chain_len is the fit's room per chain for its own storage, n_iter for a packed copy. NaN when
 * the draws cannot be diagnosed (too short chains, a constant or non-finite quantity). */
static void diagnose(const tf_fit *f, tf_diag_workspace *w, const double *base, size_t chain_len, size_t stride,
                     double *rhat, double *ess_bulk, double *ess_tail, double *mcse_mean)
{
    const double *chains[TF_FIT_MAX_CHAINS];
    for (size_t c = 0; c < f->n_chains; c++)
        chains[c] = base + c * chain_len * stride;
    tf_diag_summary d;
    tf_error ignored;
    tf_error_init(&ignored);
    if (!w || tf_diag_summarise(w, chains, f->n_chains, f->n_iter, stride, &d, &ignored) != TF_OK)
        d.rhat = d.ess_bulk = d.ess_tail = d.mcse_mean = NAN;
    *rhat = d.rhat;
    *ess_bulk = d.ess_bulk;
    if (ess_tail)
        *ess_tail = d.ess_tail;
    if (mcse_mean)
        *mcse_mean = d.mcse_mean;
}

/* The trend over years first..first + n - 1 of the series into out (see tf_fit_trend_summary);
 * x holds n_draws doubles of scratch. */
static void trend_over(const tf_fit *f, tf_diag_workspace *w, double *x, size_t first, size_t n,
                       tf_fit_trend_summary *out)
{
    size_t n_draws = f->n_chains * f->n_iter, n_decline = 0;
    out->first_year = tf_series_first_year(f->series) + (int)first;
    out->last_year = out->first_year + (int)n - 1;
    for (size_t k = 0; k < n_draws; k++) {
        double b = tf_stats_slope(f->paths + at(f, k) * f->n_years + first, n, 1);
        x[k] = expm1(b);
        n_decline += b < 0;
    }
    if (n > 1 && all_finite(x, n_draws)) {
        diagnose(f, w, x, f->n_iter, 1, &out->rhat, &out->ess_bulk, NULL, NULL);
        double prob[3] = {0.5, 0.025, 0.975}, q[3];
        moments_and_quantiles(x, n_draws, &out->mean, NULL, prob, q, 3);
        out->median = q[0];
        out->q025 = q[1];
        out->q975 = q[2];
        out->p_decline = (double)n_decline / (double)n_draws;
    } else {
        out->mean = out->median = out->q025 = out->q975 = out->p_decline = out->rhat = out->ess_bulk = NAN;
    }
}

void tf_fit_set_recent_years(tf_fit *f, size_t n)
{
    f->recent_years = n;
    f->summarised = 0;
}

tf_status tf_fit_summarise(tf_fit *f, tf_error *err)
{
    size_t n_draws = f->n_chains * f->n_iter;
    double *x = malloc(n_draws * sizeof(double));
    tf_diag_workspace *w = NULL;
    /* Chains too short to diagnose still get their moments and quantiles. */
    if (f->n_iter >= TF_DIAG_MIN_ITER &&
        tf_diag_workspace_alloc(f->n_chains, f->n_iter, &w, err) != TF_OK) {
        free(x);
        return tf_error_status(err);
    }
    if (!x) {
        tf_diag_workspace_free(w);
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory summarising a fit");
    }

    for (size_t p = 0; p < f->n_params; p++) {
        tf_fit_param_summary *ps = &f->params[p];
        diagnose(f, w, f->draws + p, f->cap, f->n_params, &ps->rhat, &ps->ess_bulk, &ps->ess_tail, &ps->mcse_mean);
        for (size_t k = 0; k < n_draws; k++)
            x[k] = f->draws[at(f, k) * f->n_params + p];
        double prob[3] = {0.025, 0.5, 0.975}, q[3];
        moments_and_quantiles(x, n_draws, &ps->mean, &ps->sd, prob, q, 3);
        ps->q025 = q[0];
        ps->q50 = q[1];
        ps->q975 = q[2];
    }

    const double *counts = tf_series_counts(f->series), *effort = tf_series_effort(f->series);
    int first_year = tf_series_first_year(f->series);
    for (size_t t = 0; t < f->n_years; t++) {
        tf_fit_year_summary *ys = &f->years[t];
        ys->year = first_year + (int)t;
        ys->count = counts[t];
        ys->effort = effort[t];
        ys->rhat = ys->ess_bulk = ys->ess_tail = NAN;
        for (size_t k = 0; k < n_draws; k++)
            x[k] = exp(f->paths[at(f, k) * f->n_years + t]);
        if (!all_finite(x, n_draws)) {
            ys->median = ys->q25 = ys->q75 = ys->q025 = ys->q975 = NAN;
            continue;
        }
        /* The first and last year are watched with the parameters (tf_fit_meets): the trend and
         * the projections start from them. The years between cost a diagnosis each and add
         * nothing to the stopping rule that these two and the parameters do not. */
        if (t == 0 || t + 1 == f->n_years)
            diagnose(f, w, f->paths + t, f->cap, f->n_years, &ys->rhat, &ys->ess_bulk, &ys->ess_tail, NULL);
        double prob[5] = {0.5, 0.25, 0.75, 0.025, 0.975}, q[5];
        moments_and_quantiles(x, n_draws, NULL, NULL, prob, q, 5);
        ys->median = q[0];
        ys->q25 = q[1];
        ys->q75 = q[2];
        ys->q025 = q[3];
        ys->q975 = q[4];
    }

    size_t recent = f->recent_years ? f->recent_years : TF_FIT_RECENT_YEARS;
    if (recent > f->n_years)
        recent = f->n_years;
    trend_over(f, w, x, 0, f->n_years, &f->trend);
    trend_over(f, w, x, f->n_years - recent, recent, &f->recent);

    free(x);
    tf_diag_workspace_free(w);
    f->summarised = 1;
    return TF_OK;
}

const tf_model *tf_fit_model(const tf_fit *f) { return f->model; }
const tf_series *tf_fit_series(const tf_fit *f) { return f->series; }
const tf_posterior *tf_fit_posterior(const tf_fit *f) { return f->post; }
const tf_fit_settings *tf_fit_settings_of(const tf_fit *f) { return &f->settings; }
size_t tf_fit_n_chains(const tf_fit *f) { return f->n_chains; }
size_t tf_fit_n_iter(const tf_fit *f) { return f->n_iter; }
size_t tf_fit_n_draws(const tf_fit *f) { return f->n_chains * f->n_iter; }
size_t tf_fit_n_params(const tf_fit *f) { return f->n_params; }
size_t tf_fit_n_years(const tf_fit *f) { return f->n_years; }
const char *tf_fit_param_name(const tf_fit *f, size_t param)
{
    return tf_model_param_name(f->model, param);
}

const double *tf_fit_draw(const tf_fit *f, size_t chain, size_t iter)
{
    return f->draws + (chain * f->cap + iter) * f->n_params;
}
double tf_fit_loglik(const tf_fit *f, size_t chain, size_t iter)
{
    return f->loglik[chain * f->cap + iter];
}
const double *tf_fit_path(const tf_fit *f, size_t chain, size_t iter)
{
    return f->paths + (chain * f->cap + iter) * f->n_years;
}
const double *tf_fit_draws(const tf_fit *f) { return f->draws; }
const double *tf_fit_logliks(const tf_fit *f) { return f->loglik; }
const double *tf_fit_paths(const tf_fit *f) { return f->paths; }

void tf_fit_year_draws(const tf_fit *f, size_t year_index, double *out)
{
    size_t n_draws = f->n_chains * f->n_iter;
    for (size_t k = 0; k < n_draws; k++)
        out[k] = f->paths[at(f, k) * f->n_years + year_index];
}

double tf_fit_acceptance(const tf_fit *f, size_t chain) { return f->acceptance[chain]; }
double tf_fit_invalid_share(const tf_fit *f, size_t chain) { return f->invalid[chain]; }

const tf_fit_param_summary *tf_fit_param(const tf_fit *f, size_t param) { return &f->params[param]; }
const tf_fit_year_summary *tf_fit_year(const tf_fit *f, size_t year_index)
{
    return &f->years[year_index];
}
const tf_fit_trend_summary *tf_fit_trend(const tf_fit *f) { return &f->trend; }
const tf_fit_trend_summary *tf_fit_trend_recent(const tf_fit *f) { return &f->recent; }

static int passes(double rhat, double ess_bulk, double ess_tail, double rhat_max, double ess_min)
{
    return rhat <= rhat_max && ess_bulk >= ess_min && ess_tail >= ess_min;
}

int tf_fit_meets(const tf_fit *f, double rhat_max, double ess_min)
{
    if (!f->summarised)
        return 0;
    for (size_t p = 0; p < f->n_params; p++) {
        const tf_fit_param_summary *ps = &f->params[p];
        if (!passes(ps->rhat, ps->ess_bulk, ps->ess_tail, rhat_max, ess_min))
            return 0;
    }
    const tf_fit_year_summary *ends[2] = {&f->years[0], &f->years[f->n_years - 1]};
    for (size_t i = 0; i < 2; i++)
        if (!passes(ends[i]->rhat, ends[i]->ess_bulk, ends[i]->ess_tail, rhat_max, ess_min))
            return 0;
    return 1;
}

tf_status tf_fit_check(const tf_fit *f, double rhat_max, double ess_min, int *pass, tf_error *err)
{
    *pass = 0;
    if (f->n_iter < TF_DIAG_MIN_ITER)
        return TF_OK;
    tf_diag_workspace *w = NULL;
    if (tf_diag_workspace_alloc(f->n_chains, f->n_iter, &w, err) != TF_OK)
        return tf_error_status(err);
    /* In the order of the summaries; the first quantity that fails ends the check, which is
     * what most checks of a run by need find. */
    int ok = 1;
    for (size_t p = 0; ok && p < f->n_params; p++) {
        double rhat, bulk, tail;
        diagnose(f, w, f->draws + p, f->cap, f->n_params, &rhat, &bulk, &tail, NULL);
        ok = passes(rhat, bulk, tail, rhat_max, ess_min);
    }
    size_t ends[2] = {0, f->n_years - 1};
    for (size_t i = 0; ok && i < 2; i++) {
        double rhat, bulk, tail;
        diagnose(f, w, f->paths + ends[i], f->cap, f->n_years, &rhat, &bulk, &tail, NULL);
        ok = passes(rhat, bulk, tail, rhat_max, ess_min);
    }
    tf_diag_workspace_free(w);
    *pass = ok;
    return TF_OK;
}

int tf_fit_converged(const tf_fit *f)
{
    return tf_fit_meets(f, TF_FIT_RHAT_MAX, TF_FIT_ESS_MIN);
}

/* The larger (worst) of two R-hats and the smaller (worst) of two ESSs, NaN ranking worst
 * (fit.h): fmax and fmin would drop the NaN instead. */
static double worse_rhat(double a, double b) { return isnan(a) || isnan(b) ? NAN : a > b ? a : b; }
static double worse_ess(double a, double b) { return isnan(a) || isnan(b) ? NAN : a < b ? a : b; }

tf_fit_health_summary tf_fit_health(const tf_fit *f)
{
    tf_fit_health_summary h = {.max_rhat = -INFINITY, .min_bulk_ess = INFINITY, .min_tail_ess = INFINITY};
    for (size_t p = 0; p < f->n_params; p++) {
        const tf_fit_param_summary *ps = &f->params[p];
        h.max_rhat = worse_rhat(h.max_rhat, ps->rhat);
        h.min_bulk_ess = worse_ess(h.min_bulk_ess, ps->ess_bulk);
        h.min_tail_ess = worse_ess(h.min_tail_ess, ps->ess_tail);
        h.n_undiagnosed += isnan(ps->rhat) || isnan(ps->ess_bulk) || isnan(ps->ess_tail);
    }
    h.min_ess = worse_ess(h.min_bulk_ess, h.min_tail_ess);
    /* Summed in chain order, so that the mean is the same bits as the tables always showed. */
    h.min_acceptance = INFINITY;
    for (size_t c = 0; c < f->n_chains; c++) {
        h.mean_acceptance += f->acceptance[c] / (double)f->n_chains;
        h.min_acceptance = fmin(h.min_acceptance, f->acceptance[c]);
        h.mean_invalid += f->invalid[c] / (double)f->n_chains;
    }
    h.converged = tf_fit_converged(f);
    return h;
}
