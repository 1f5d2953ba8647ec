/* Unit tests for the fit result (stored draws and their summaries) and for the posterior's
 * prior side on the unconstrained scale (transforms with their Jacobians). */
#include "tf_test.h"
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_fit.h>

#include "model/model.h"
#include "model/prior.h"
#include "sampler/fit.h"
#include "sampler/posterior.h"
#include "survey/series.h"
#include "util/rng.h"

static tf_model *make_model(const char *g, const char *o)
{
    tf_model *m = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new(g, o, &m, &err), TF_OK);
    return m;
}

/* Sample quantile by linear interpolation between order statistics, Hyndman & Fan (1996, The
 * American Statistician 50:361) definition 7: h = (n - 1) p, x[floor h] + (h - floor h) (x[floor
 * h + 1] - x[floor h]) of the sorted sample. */
static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}
static double quantile7(const double *v, size_t n, double p)
{
    double *s = malloc(n * sizeof *s);
    memcpy(s, v, n * sizeof *s);
    qsort(s, n, sizeof *s, cmp);
    double h = (double)(n - 1) * p;
    size_t lo = (size_t)floor(h);
    double q = lo + 1 < n ? s[lo] + (h - (double)lo) * (s[lo + 1] - s[lo]) : s[lo];
    free(s);
    return q;
}

#define CH 2
#define IT 8
#define YR 4

START_TEST(summaries_of_known_draws)
{
    tf_model *m = make_model("gompertz", "poisson");
    double y[YR] = {10, 12, NAN, 9}, e[YR] = {1, 2, 1, 1};
    tf_error err;
    tf_error_init(&err);
    tf_series *s = tf_series_new("a", 1990, YR, y, e, NULL, &err);
    ck_assert_ptr_nonnull(s);
    tf_fit *f = tf_fit_alloc(m, s, CH, IT);
    ck_assert_ptr_nonnull(f);
    double all[3][CH * IT], paths[CH * IT][YR], trend[CH * IT];
    size_t n_decline = 0;
    for (size_t c = 0; c < CH; c++)
        for (size_t i = 0; i < IT; i++) {
            size_t k = c * IT + i;
            double theta[3] = {0.1 + 0.01 * (double)((k * 7) % 16), 100.0 + (double)((k * 5) % 16), 0.2 + 0.001 * (double)k};
            double path[YR];
            for (size_t t = 0; t < YR; t++)
                path[t] = 2.0 + 0.05 * (double)t * ((k % 3) ? 1.0 : -1.0) + 0.01 * (double)k;
            tf_fit_record(f, c, i, theta, -10.0 - (double)k, path);
            for (int p = 0; p < 3; p++)
                all[p][k] = theta[p];
            memcpy(paths[k], path, sizeof path);
            double slope = (path[YR - 1] - path[0]) / (YR - 1);
            trend[k] = exp(slope) - 1.0;
            n_decline += slope < 0;
        }
    tf_fit_set_chain_stats(f, 1, 0.25, 0.01);
    tf_fit_settings st = {.n_warmup = 10, .thin = 1, .n_particles = 50, .loglik_sd = 1.1, .seed = 9};
    tf_fit_set_settings(f, &st);
    ck_assert(!tf_fit_converged(f));   /* not summarised yet */
    ck_assert_int_eq(tf_fit_summarise(f, &err), TF_OK);

    ck_assert_uint_eq(tf_fit_n_draws(f), CH * IT);
    ck_assert_uint_eq(tf_fit_n_params(f), 3);
    ck_assert_uint_eq(tf_fit_n_years(f), YR);
    ck_assert_str_eq(tf_fit_param_name(f, 1), "K");
    ck_assert(tf_fit_loglik(f, 1, 2) == -10.0 - (double)(IT + 2));
    ck_assert(tf_fit_draw(f, 1, 3)[0] == all[0][IT + 3]);
    ck_assert(tf_fit_draws(f)[(IT + 3) * 3 + 2] == all[2][IT + 3]);
    ck_assert(tf_fit_path(f, 0, 5)[2] == paths[5][2]);
    ck_assert(tf_fit_acceptance(f, 1) == 0.25 && tf_fit_invalid_share(f, 1) == 0.01);
    ck_assert_uint_eq(tf_fit_settings_of(f)->n_particles, 50);

    const double tol = 1e-12;
    for (int p = 0; p < 3; p++) {
        const tf_fit_param_summary *ps = tf_fit_param(f, p);
        double mean = 0, ss = 0;
        for (size_t k = 0; k < CH * IT; k++)
            mean += all[p][k] / (CH * IT);
        for (size_t k = 0; k < CH * IT; k++)
            ss += (all[p][k] - mean) * (all[p][k] - mean);
        ck_assert(fabs(ps->mean - mean) <= tol * fabs(mean));
        ck_assert(fabs(ps->sd - sqrt(ss / (CH * IT - 1))) <= 1e-9);
        ck_assert(fabs(ps->q025 - quantile7(all[p], CH * IT, 0.025)) <= tol * fabs(ps->q025));
        ck_assert(fabs(ps->q50 - quantile7(all[p], CH * IT, 0.5)) <= tol * fabs(ps->q50));
        ck_assert(fabs(ps->q975 - quantile7(all[p], CH * IT, 0.975)) <= tol * fabs(ps->q975));
        ck_assert(isfinite(ps->rhat) && isfinite(ps->ess_bulk) && isfinite(ps->mcse_mean));
    }
    for (size_t t = 0; t < YR; t++) {
        const tf_fit_year_summary *ys = tf_fit_year(f, t);
        double col[CH * IT];
        for (size_t k = 0; k < CH * IT; k++)
            col[k] = exp(paths[k][t]);
        ck_assert_int_eq(ys->year, 1990 + (int)t);
        ck_assert(t == 2 ? isnan(ys->count) : ys->count == y[t]);
        ck_assert(ys->effort == (t == 2 ? 1.0 : e[t]));
        ck_assert(fabs(ys->median - quantile7(col, CH * IT, 0.5)) <= 1e-9 * ys->median);
        ck_assert(fabs(ys->q25 - quantile7(col, CH * IT, 0.25)) <= 1e-9 * ys->q25);
        ck_assert(fabs(ys->q975 - quantile7(col, CH * IT, 0.975)) <= 1e-9 * ys->q975);
    }
    const tf_fit_trend_summary *tr = tf_fit_trend(f);
    ck_assert(fabs(tr->median - quantile7(trend, CH * IT, 0.5)) <= 1e-9);
    ck_assert(fabs(tr->q025 - quantile7(trend, CH * IT, 0.025)) <= 1e-9);
    ck_assert(fabs(tr->p_decline - (double)n_decline / (CH * IT)) <= 1e-15);
    double x_last[CH * IT];
    tf_fit_year_draws(f, YR - 1, x_last);
    ck_assert(x_last[7] == paths[7][YR - 1]);
    /* 16 draws in short chains are far from the thresholds. */
    ck_assert(!tf_fit_converged(f));
    tf_fit_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* R-hat and ESS (Vehtari et al. 2021) decide the convergence flag, over the parameters and the
 * log-abundance of the first and last year: four chains of independent normals pass; the same
 * chains with one shifted by two sd fail on R-hat, whether the shift is in a parameter or in the
 * last year's abundance; a higher ESS target than the draws give fails tf_fit_meets. */
/* The trends are the least-squares slopes of each draw's path on the year, checked against GSL's
 * own linear regression (gsl_fit_linear, an independent computation); on paths that fall for
 * five years and then stay level, the slope over every year lies between the endpoint ratio and
 * zero, and the recent trend (the last 10 years) is level. */
START_TEST(trends_are_least_squares_slopes)
{
    enum { C = 2, I = 6, Y = 20 };
    tf_model *m = make_model("exponential", "poisson");
    double y[Y], e[Y];
    for (size_t t = 0; t < Y; t++)
        y[t] = 100, e[t] = 1;
    tf_error err;
    tf_error_init(&err);
    tf_series *s = tf_series_new("a", 2001, Y, y, e, NULL, &err);
    tf_fit *f = tf_fit_alloc(m, s, C, I);
    double slopes[C * I], recent[C * I], ends[C * I], years[Y];
    for (size_t t = 0; t < Y; t++)
        years[t] = 2001.0 + (double)t;
    for (size_t c = 0; c < C; c++)
        for (size_t i = 0; i < I; i++) {
            size_t k = c * I + i;
            double theta[2] = {0.0, 0.1}, path[Y];
            for (size_t t = 0; t < Y; t++)
                path[t] = log(500.0) - 0.1 * (double)(t < 5 ? t : 5) + 0.01 * sin((double)(k + 3 * t));
            tf_fit_record(f, c, i, theta, -5.0, path);
            double c0, c1, cov00, cov01, cov11, sumsq;
            gsl_fit_linear(years, 1, path, 1, Y, &c0, &c1, &cov00, &cov01, &cov11, &sumsq);
            slopes[k] = expm1(c1);
            gsl_fit_linear(years + Y - 10, 1, path + Y - 10, 1, 10, &c0, &c1, &cov00, &cov01, &cov11, &sumsq);
            recent[k] = expm1(c1);
            ends[k] = expm1((path[Y - 1] - path[0]) / (Y - 1));
        }
    tf_fit_settings st = {.n_warmup = 10, .thin = 1, .n_particles = 50, .seed = 9};
    tf_fit_set_settings(f, &st);
    tf_fit_set_recent_years(f, 10);
    ck_assert_int_eq(tf_fit_summarise(f, &err), TF_OK);
    const tf_fit_trend_summary *whole = tf_fit_trend(f), *last = tf_fit_trend_recent(f);
    /* To rounding: two ways of summing the same least-squares slope. */
    ck_assert(fabs(whole->median - quantile7(slopes, C * I, 0.5)) <= 1e-12);
    ck_assert(fabs(whole->q025 - quantile7(slopes, C * I, 0.025)) <= 1e-12);
    ck_assert(fabs(last->median - quantile7(recent, C * I, 0.5)) <= 1e-12);
    ck_assert(whole->first_year == 2001 && whole->last_year == 2020);
    ck_assert(last->first_year == 2011 && last->last_year == 2020);
    /* Between the endpoint ratio and zero; the recent years are level (the wiggle is 0.01). */
    double end_median = quantile7(ends, C * I, 0.5);
    ck_assert(end_median < whole->median && whole->median < 0);
    ck_assert(fabs(last->median) < 0.005);
    tf_fit_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

START_TEST(convergence_flag_follows_diagnostics)
{
    tf_model *m = make_model("exponential", "poisson");
    double y[5] = {1, 2, 3, 4, 5};
    tf_series *s = tf_series_new("b", 2000, 5, y, NULL, NULL, NULL);
    size_t n = 2000;
    for (int shifted = 0; shifted < 3; shifted++) {
        tf_fit *f = tf_fit_alloc(m, s, 4, n);
        tf_rng rng;
        tf_rng_derive(&rng, 17, NULL, 0);
        for (size_t c = 0; c < 4; c++)
            for (size_t i = 0; i < n; i++) {
                double theta[2] = {tf_rng_normal(&rng) + (shifted == 1 && c == 3 ? 2.0 : 0.0),
                                   0.5 + 0.1 * tf_rng_normal(&rng)};
                double path[5] = {1 + 0.1 * tf_rng_normal(&rng), 1, 1, 1,
                                  1 + 0.1 * tf_rng_normal(&rng) + (shifted == 2 && c == 3 ? 0.2 : 0.0)};
                tf_fit_record(f, c, i, theta, -1.0, path);
            }
        ck_assert_int_eq(tf_fit_summarise(f, NULL), TF_OK);
        /* The quick check of a run by need agrees with the summaries' verdict. */
        int pass = -1;
        ck_assert_int_eq(tf_fit_check(f, TF_FIT_RHAT_MAX, TF_FIT_ESS_MIN, &pass, NULL), TF_OK);
        ck_assert_int_eq(pass, tf_fit_converged(f));
        ck_assert_int_eq(tf_fit_check(f, TF_FIT_RHAT_MAX, 20000, &pass, NULL), TF_OK);
        ck_assert_int_eq(pass, 0);
        if (shifted == 1) {
            ck_assert(tf_fit_param(f, 0)->rhat > 1.1);
            ck_assert(!tf_fit_converged(f));
        } else if (shifted == 2) {
            ck_assert(tf_fit_param(f, 0)->rhat < TF_FIT_RHAT_MAX);
            ck_assert(tf_fit_year(f, 4)->rhat > 1.1);
            ck_assert(!tf_fit_converged(f));
        } else {
            ck_assert(tf_fit_param(f, 0)->rhat < TF_FIT_RHAT_MAX);
            ck_assert(tf_fit_param(f, 0)->ess_bulk > TF_FIT_ESS_MIN);
            ck_assert(tf_fit_year(f, 0)->ess_tail > TF_FIT_ESS_MIN);
            ck_assert(isnan(tf_fit_year(f, 2)->rhat));   /* years between are not diagnosed */
            ck_assert(tf_fit_converged(f));
            /* 8000 independent draws cannot show an ESS of 20000. */
            ck_assert(!tf_fit_meets(f, TF_FIT_RHAT_MAX, 20000));
        }
        tf_fit_free(f);
    }
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* The health summary: the worst R-hat and smallest ESS over the parameters and the acceptance
 * over the chains, with its NaN rule (fit.h): a parameter that never moved has an undefined R-hat
 * and ESS, which makes the worst values NaN wherever the parameter stands in the model's order,
 * and fails every threshold test. */
START_TEST(health_takes_the_worst_with_nan_worst_of_all)
{
    tf_model *m = make_model("exponential", "poisson");
    double y[5] = {1, 2, 3, 4, 5};
    tf_series *s = tf_series_new("h", 2000, 5, y, NULL, NULL, NULL);
    const size_t n = 1000;
    const double acc[4] = {0.2, 0.3, 0.1, 0.4}, inv[4] = {0.0, 0.02, 0.0, 0.02};
    /* frozen: -1 every parameter moves; 0 or 1 that parameter stays at its start in every chain. */
    for (int frozen = -1; frozen <= 1; frozen++) {
        tf_fit *f = tf_fit_alloc(m, s, 4, n);
        tf_rng rng;
        tf_rng_derive(&rng, 23, NULL, 0);
        for (size_t c = 0; c < 4; c++) {
            for (size_t i = 0; i < n; i++) {
                double theta[2] = {0.1 * tf_rng_normal(&rng), 0.5 + 0.1 * tf_rng_normal(&rng)};
                if (frozen >= 0)
                    theta[frozen] = 0.25;
                double path[5] = {1 + 0.1 * tf_rng_normal(&rng), 1, 1, 1, 1 + 0.1 * tf_rng_normal(&rng)};
                tf_fit_record(f, c, i, theta, -1.0, path);
            }
            tf_fit_set_chain_stats(f, c, acc[c], inv[c]);
        }
        ck_assert_int_eq(tf_fit_summarise(f, NULL), TF_OK);
        tf_fit_health_summary h = tf_fit_health(f);
        /* Acceptance: the mean and the lowest of the four chains, exactly (sums of four doubles
         * divided as the tables divide them). */
        ck_assert_double_eq(h.mean_acceptance, 0.2 / 4 + 0.3 / 4 + 0.1 / 4 + 0.4 / 4);
        ck_assert_double_eq(h.min_acceptance, 0.1);
        ck_assert_double_eq_tol(h.mean_invalid, 0.01, 1e-15);
        const tf_fit_param_summary *a = tf_fit_param(f, 0), *b = tf_fit_param(f, 1);
        if (frozen < 0) {
            /* Independent draws: every figure defined, and the worst of the two parameters. */
            ck_assert(isfinite(a->rhat) && isfinite(b->rhat));
            ck_assert_uint_eq(h.n_undiagnosed, 0);
            ck_assert_double_eq(h.max_rhat, fmax(a->rhat, b->rhat));
            ck_assert_double_eq(h.min_bulk_ess, fmin(a->ess_bulk, b->ess_bulk));
            ck_assert_double_eq(h.min_tail_ess, fmin(a->ess_tail, b->ess_tail));
            ck_assert_double_eq(h.min_ess, fmin(h.min_bulk_ess, h.min_tail_ess));
            ck_assert_int_eq(h.converged, tf_fit_converged(f));
        } else {
            /* The frozen parameter cannot be diagnosed; the other one can. */
            const tf_fit_param_summary *still = frozen == 0 ? a : b, *moving = frozen == 0 ? b : a;
            ck_assert(isnan(still->rhat) && isnan(still->ess_bulk) && isnan(still->ess_tail));
            ck_assert(isfinite(moving->rhat) && isfinite(moving->ess_bulk));
            ck_assert_uint_eq(h.n_undiagnosed, 1);
            ck_assert(isnan(h.max_rhat));
            ck_assert(isnan(h.min_bulk_ess) && isnan(h.min_tail_ess) && isnan(h.min_ess));
            ck_assert(!(h.max_rhat <= TF_FIT_RHAT_MAX) && !(h.min_ess >= TF_FIT_ESS_MIN));
            ck_assert_int_eq(h.converged, 0);
        }
        tf_fit_free(f);
    }
    /* Chains too short to diagnose: every parameter undefined. */
    tf_fit *f = tf_fit_alloc(m, s, 2, 3);
    for (size_t c = 0; c < 2; c++)
        for (size_t i = 0; i < 3; i++) {
            double theta[2] = {0.1 * (double)(i + c), 0.5 + 0.01 * (double)i}, path[5] = {1, 1, 1, 1, 1};
            tf_fit_record(f, c, i, theta, -1.0, path);
        }
    ck_assert_int_eq(tf_fit_summarise(f, NULL), TF_OK);
    tf_fit_health_summary h = tf_fit_health(f);
    ck_assert_uint_eq(h.n_undiagnosed, 2);
    ck_assert(isnan(h.max_rhat) && isnan(h.min_ess));
    ck_assert_int_eq(h.converged, 0);
    tf_fit_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* A fit counting fewer draws than it has room for (a run by need between blocks) summarises the
 * first n_iter of each chain, and tf_fit_compact moves them together for the whole-block
 * accessors without changing a summary. */
START_TEST(partly_filled_fit_summarises_and_compacts)
{
    tf_model *m = make_model("exponential", "poisson");
    double y[5] = {1, 2, 3, 4, 5};
    tf_series *s = tf_series_new("b", 2000, 5, y, NULL, NULL, NULL);
    size_t cap = 50, n = 30;
    tf_fit *f = tf_fit_alloc(m, s, 3, cap);
    tf_fit *g = tf_fit_alloc(m, s, 3, n);   /* the same draws, stored tightly */
    tf_rng rng;
    tf_rng_derive(&rng, 5, NULL, 0);
    for (size_t c = 0; c < 3; c++)
        for (size_t i = 0; i < n; i++) {
            double theta[2] = {tf_rng_normal(&rng), 0.5 + 0.1 * tf_rng_normal(&rng)};
            double path[5] = {tf_rng_normal(&rng), 1, 2, 3, tf_rng_normal(&rng)};
            tf_fit_record(f, c, i, theta, -(double)i, path);
            tf_fit_record(g, c, i, theta, -(double)i, path);
        }
    tf_fit_set_n_iter(f, n);
    ck_assert_uint_eq(tf_fit_n_iter(f), n);
    ck_assert_uint_eq(tf_fit_n_draws(f), 3 * n);
    ck_assert_int_eq(tf_fit_summarise(f, NULL), TF_OK);
    ck_assert_int_eq(tf_fit_summarise(g, NULL), TF_OK);
    ck_assert_double_eq(tf_fit_param(f, 0)->mean, tf_fit_param(g, 0)->mean);
    ck_assert_double_eq(tf_fit_param(f, 0)->ess_bulk, tf_fit_param(g, 0)->ess_bulk);
    ck_assert_double_eq(tf_fit_year(f, 4)->rhat, tf_fit_year(g, 4)->rhat);
    ck_assert_double_eq(tf_fit_trend(f)->median, tf_fit_trend(g)->median);
    /* The trend is diagnosed from a packed copy: its chains are n_iter apart, not the room. */
    ck_assert_double_eq(tf_fit_trend(f)->rhat, tf_fit_trend(g)->rhat);
    ck_assert_double_eq(tf_fit_trend(f)->ess_bulk, tf_fit_trend(g)->ess_bulk);
    ck_assert_double_eq(*tf_fit_draw(f, 2, n - 1), *tf_fit_draw(g, 2, n - 1));
    tf_fit_compact(f);
    ck_assert(memcmp(tf_fit_draws(f), tf_fit_draws(g), 3 * n * 2 * sizeof(double)) == 0);
    ck_assert(memcmp(tf_fit_paths(f), tf_fit_paths(g), 3 * n * 5 * sizeof(double)) == 0);
    ck_assert(memcmp(tf_fit_logliks(f), tf_fit_logliks(g), 3 * n * sizeof(double)) == 0);
    ck_assert_double_eq(tf_fit_param(f, 1)->sd, tf_fit_param(g, 1)->sd);
    tf_fit_free(f);
    tf_fit_free(g);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* Halving keeps draws 1, 3, 5, ... of each chain, with their log-likelihoods and paths, at the
 * front of that chain's block, for odd and even numbers of draws (the doubling in pmmh.c relies
 * on it). */
START_TEST(halving_keeps_every_second_draw)
{
    tf_model *m = make_model("ricker", "poisson");
    double y[YR] = {10, 12, 11, 9}, e[YR] = {1, 1, 1, 1};
    tf_error err;
    tf_error_init(&err);
    tf_series *s = tf_series_new("a", 1990, YR, y, e, NULL, &err);
    ck_assert_ptr_nonnull(s);
    for (size_t n = 7; n <= 8; n++) {
        tf_fit *f = tf_fit_alloc(m, s, CH, n);
        ck_assert_ptr_nonnull(f);
        for (size_t c = 0; c < CH; c++)
            for (size_t i = 0; i < n; i++) {
                double v = (double)(100 * c + i), theta[3] = {v, v + 0.5, v + 0.25}, path[YR] = {v, v, v, -v};
                tf_fit_record(f, c, i, theta, -v, path);
            }
        size_t h = tf_fit_halve(f);
        ck_assert_uint_eq(h, n / 2);
        for (size_t c = 0; c < CH; c++)
            for (size_t i = 0; i < h; i++) {
                double v = (double)(100 * c + 2 * i + 1);
                ck_assert_double_eq(tf_fit_draw(f, c, i)[0], v);
                ck_assert_double_eq(tf_fit_draw(f, c, i)[2], v + 0.25);
                ck_assert_double_eq(tf_fit_loglik(f, c, i), -v);
                ck_assert_double_eq(tf_fit_path(f, c, i)[YR - 1], -v);
            }
        ck_assert_int_eq(tf_fit_converged(f), 0);   /* summaries are stale until recomputed */
        tf_fit_free(f);
    }
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

START_TEST(fit_alloc_refuses_bad_sizes)
{
    tf_model *m = make_model("exponential", "poisson");
    double y[5] = {1, 2, 3, 4, 5};
    tf_series *s = tf_series_new("b", 2000, 5, y, NULL, NULL, NULL);
    ck_assert_ptr_null(tf_fit_alloc(m, s, 0, 10));
    ck_assert_ptr_null(tf_fit_alloc(m, s, 2, 0));
    ck_assert_ptr_null(tf_fit_alloc(m, s, TF_FIT_MAX_CHAINS + 1, 10));
    ck_assert_ptr_null(tf_fit_alloc(NULL, s, 2, 10));
    ck_assert_ptr_null(tf_fit_alloc(m, s, 2, SIZE_MAX / 4));
    tf_fit_free(NULL);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* ---- posterior.c ---- */

static void assign(tf_prior_set *set, const char *name, tf_prior_kind kind, double a, double b, double lo, double hi)
{
    tf_prior p;
    double par[3] = {a, b, 0};
    ck_assert_int_eq(tf_prior_init(&p, kind, par, lo, hi, NULL), TF_OK);
    ck_assert_int_eq(tf_prior_set_assign(set, name, &p, NULL), TF_OK);
}

static tf_prior_set *exponential_priors(const tf_model *m, int truncated_sigma)
{
    const char *names[2] = {tf_model_param_name(m, 0), tf_model_param_name(m, 1)};
    double lo[2] = {tf_model_param_lower(m, 0), tf_model_param_lower(m, 1)};
    double hi[2] = {tf_model_param_upper(m, 0), tf_model_param_upper(m, 1)};
    tf_prior_set *set = NULL;
    ck_assert_int_eq(tf_prior_set_new(2, names, lo, hi, &set, NULL), TF_OK);
    assign(set, "r", TF_PRIOR_NORMAL, 0.1, 0.5, -INFINITY, INFINITY);
    if (truncated_sigma)
        assign(set, "sigma", TF_PRIOR_UNIFORM, 0.05, 2.0, -INFINITY, INFINITY);
    else
        assign(set, "sigma", TF_PRIOR_HALFNORMAL, 0.5, 0, -INFINITY, INFINITY);
    return set;
}

/* The density of z = (r, transform(sigma)) must integrate to 1 (change of variables: the log
 * Jacobian makes it a density on the real plane). Midpoint rule on a grid wide enough that the
 * tails left out hold less than 1e-6; the rule's error for these smooth integrands is far below
 * the 1e-4 tolerance. */
START_TEST(unconstrained_density_integrates_to_one)
{
    tf_model *m = make_model("exponential", "poisson");
    for (int trunc = 0; trunc < 2; trunc++) {
        tf_prior_set *set = exponential_priors(m, trunc);
        tf_posterior *post = NULL;
        ck_assert_int_eq(tf_posterior_new(m, set, &post, NULL), TF_OK);
        ck_assert_uint_eq(tf_posterior_dim(post), 2);
        const double h = 0.01;
        double total = 0;
        for (double z0 = -4.0 + h / 2; z0 < 4.2; z0 += h)
            for (double z1 = -25.0 + h / 2; z1 < 25.0; z1 += h) {
                double z[2] = {z0, z1}, theta[2];
                double lp = tf_posterior_log_prior_z(post, z, theta);
                if (isfinite(lp))
                    total += exp(lp) * h * h;
            }
        ck_assert_msg(fabs(total - 1.0) < 1e-4, "integral %.8f (truncated %d)", total, trunc);
        /* theta -> z -> theta, and points outside the support have no z. */
        double theta[2] = {-0.3, 0.7}, z[2], back[2];
        ck_assert(tf_posterior_to_z(post, theta, z));
        tf_posterior_log_prior_z(post, z, back);
        ck_assert(fabs(back[0] - theta[0]) < 1e-12 && fabs(back[1] - theta[1]) < 1e-12);
        double outside[2] = {0.0, trunc ? 3.0 : -1.0};
        ck_assert(!tf_posterior_to_z(post, outside, z));
        ck_assert(isinf(tf_posterior_log_prior(post, outside)));
        tf_posterior_free(post);
        tf_prior_set_free(set);
    }
    tf_model_free(m);
}
END_TEST

/* Prior draws: the half-normal(0.5) mean is 0.5 sqrt(2/pi) and its sd 0.5 sqrt(1 - 2/pi)
 * (Johnson, Kotz & Balakrishnan 1994, Continuous Univariate Distributions 1, section 13.10,
 * recalled from memory); with 20000 draws the mean is within 4.5 standard errors. */
START_TEST(prior_draws_follow_the_prior)
{
    tf_model *m = make_model("exponential", "poisson");
    tf_prior_set *set = exponential_priors(m, 0);
    tf_posterior *post = NULL;
    ck_assert_int_eq(tf_posterior_new(m, set, &post, NULL), TF_OK);
    tf_rng rng;
    tf_rng_derive(&rng, 4, NULL, 0);
    size_t n = 20000;
    double sum = 0;
    for (size_t k = 0; k < n; k++) {
        double theta[2], z[2], back[2];
        tf_posterior_draw(post, &rng, theta, z);
        ck_assert(theta[1] > 0);
        tf_posterior_log_prior_z(post, z, back);
        ck_assert(fabs(back[1] - theta[1]) <= 1e-12 * theta[1]);
        sum += theta[1];
    }
    const double pi = 3.141592653589793;
    double mean = 0.5 * sqrt(2.0 / pi), se = 0.5 * sqrt(1.0 - 2.0 / pi) / sqrt((double)n);
    ck_assert_msg(fabs(sum / (double)n - mean) < 4.5 * se, "mean %g want %g", sum / (double)n, mean);
    tf_posterior_free(post);
    tf_prior_set_free(set);
    tf_model_free(m);
}
END_TEST

START_TEST(mismatched_priors_are_refused)
{
    tf_model *m = make_model("exponential", "poisson"), *g = make_model("gompertz", "poisson");
    tf_prior_set *set = exponential_priors(m, 0);
    tf_posterior *post = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_posterior_new(g, set, &post, &err), TF_ERR_INVALID);
    ck_assert_ptr_null(post);
    /* An incomplete set. */
    const char *names[2] = {"r", "sigma"};
    tf_prior_set *half = NULL;
    ck_assert_int_eq(tf_prior_set_new(2, names, NULL, NULL, &half, NULL), TF_OK);
    assign(half, "r", TF_PRIOR_NORMAL, 0, 1, -INFINITY, INFINITY);
    tf_error_init(&err);
    ck_assert_int_eq(tf_posterior_new(m, half, &post, &err), TF_ERR_INVALID);
    ck_assert_ptr_null(post);
    tf_prior_set_free(half);
    tf_prior_set_free(set);
    tf_model_free(m);
    tf_model_free(g);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("fit");
    TCase *tc = tcase_create("result");
    tcase_add_test(tc, summaries_of_known_draws);
    tcase_add_test(tc, trends_are_least_squares_slopes);
    tcase_add_test(tc, convergence_flag_follows_diagnostics);
    tcase_add_test(tc, health_takes_the_worst_with_nan_worst_of_all);
    tcase_add_test(tc, partly_filled_fit_summarises_and_compacts);
    tcase_add_test(tc, fit_alloc_refuses_bad_sizes);
    tcase_add_test(tc, halving_keeps_every_second_draw);
    tcase_add_test(tc, unconstrained_density_integrates_to_one);
    tcase_add_test(tc, prior_draws_follow_the_prior);
    tcase_add_test(tc, mismatched_priors_are_refused);
    suite_add_tcase(s, tc);
    return s;
}
