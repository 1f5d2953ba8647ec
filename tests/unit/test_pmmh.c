/* Unit tests for the PMMH run: its posterior against an exact-likelihood Metropolis-Hastings run
 * where the Kalman filter gives the likelihood, identical results for any number of threads,
 * interruption, and refused settings. */
#include "tf_test.h"
#include <math.h>
#include <signal.h>
#include <stdlib.h>
#include <string.h>

#include "kalman_ref.h"
#include "sampler/screen.h"
#include "filter/filter.h"
#include "model/model.h"
#include "model/prior.h"
#include "sampler/chain.h"
#include "sampler/diagnostics.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "sampler/posterior.h"
#include "survey/series.h"

/* Under the sanitizers everything runs 10-20 times slower, under valgrind some 50 times: the
 * statistical test then runs shorter chains, and its tolerances, taken from the Monte Carlo
 * errors, widen with them. */
static int sanitized(void) { return getenv("TF_SANITIZE") != NULL || tf_test_valgrind(); }

#define T_YEARS 25
static const double TWO_PI = 6.283185307179586;
#define MISSING_YEAR 12

typedef struct {
    tf_model *m;
    tf_series *s;
    tf_prior_set *priors;
    tf_posterior *post;
} setup;

static void prior(tf_prior_set *set, const char *name, tf_prior_kind kind, double a, double b, double lo, double hi)
{
    tf_prior p;
    double par[3] = {a, b, 0};
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_prior_init(&p, kind, par, lo, hi, &err), TF_OK);
    ck_assert_int_eq(tf_prior_set_assign(set, name, &p, &err), TF_OK);
}

/* Gompertz growth with log-normal counting error, 25 years simulated at r = 0.4, K = 300,
 * sigma = 0.12, tau = 0.15 from 150 animals, one year left unsurveyed. Priors as the default
 * model files give them (halfnormal r and sigma and tau, lognormal K centred on the data). */
static void make_setup(setup *su, const char *obs)
{
    tf_error err;
    tf_error_init(&err);
    memset(su, 0, sizeof *su);
    ck_assert_int_eq(tf_model_new("gompertz", obs, &su->m, &err), TF_OK);
    double theta[4] = {0.4, 300.0, 0.12, 0.15};
    double x[T_YEARS], y[T_YEARS];
    uint64_t key = 77;
    tf_rng rng;
    tf_rng_derive(&rng, 2024, &key, 1);
    ck_assert_int_eq(tf_model_simulate(su->m, theta, log(150.0), NULL, T_YEARS, &rng, x, y, &err), TF_OK);
    y[MISSING_YEAR] = NAN;
    su->s = tf_series_new("sim", 2000, T_YEARS, y, NULL, NULL, &err);
    ck_assert_ptr_nonnull(su->s);
    ck_assert_int_eq(tf_model_initial_from_series(su->m, su->s, &err), TF_OK);

    size_t n = tf_model_n_params(su->m);
    const char *names[TF_MAX_PARAMS];
    double lower[TF_MAX_PARAMS], upper[TF_MAX_PARAMS];
    for (size_t i = 0; i < n; i++) {
        names[i] = tf_model_param_name(su->m, i);
        lower[i] = tf_model_param_lower(su->m, i);
        upper[i] = tf_model_param_upper(su->m, i);
    }
    ck_assert_int_eq(tf_prior_set_new(n, names, lower, upper, &su->priors, &err), TF_OK);
    prior(su->priors, "r", TF_PRIOR_HALFNORMAL, 1.0, 0, -INFINITY, 5.0);
    prior(su->priors, "K", TF_PRIOR_LOGNORMAL, log(300.0), 1.0, 1.0, INFINITY);
    prior(su->priors, "sigma", TF_PRIOR_HALFNORMAL, 0.5, 0, -INFINITY, INFINITY);
    if (n > 3)
        prior(su->priors, tf_model_param_name(su->m, 3), TF_PRIOR_HALFNORMAL, 0.5, 0, -INFINITY, INFINITY);
    ck_assert_int_eq(tf_posterior_new(su->m, su->priors, &su->post, &err), TF_OK);
}

static void free_setup(setup *su)
{
    tf_posterior_free(su->post);
    tf_prior_set_free(su->priors);
    tf_series_free(su->s);
    tf_model_free(su->m);
}

/* ---- the exact-likelihood chain (its target is kalman_ref.h's kalman_target) ---- */

/* The log-normal counting model must be the one the Kalman filter assumes,
 * ln y ~ Normal(ln mu, tau): checked on its own density at a few points. */
static void check_lognormal_density(const tf_model *m)
{
    const tf_obs_type *o = tf_model_obs(m);
    double p[1] = {0.3};
    double ys[3] = {5.0, 120.0, 3000.0}, mus[3] = {7.0, 100.0, 2500.0};
    for (int i = 0; i < 3; i++) {
        double dz = (log(ys[i]) - log(mus[i])) / p[0];
        double want = -log(ys[i]) - log(p[0]) - 0.5 * log(TWO_PI) - 0.5 * dz * dz;
        ck_assert(fabs(o->logpmf(p, ys[i], mus[i]) - want) < 1e-10);
    }
}

/* The Kalman recursion against the multivariate normal density of the surveyed log counts,
 * whose mean and covariance follow from the AR(1) state directly: E x_t = alpha (1 - beta^t) /
 * (1 - beta) + beta^t m1 ... computed here by propagating means and covariances. */
static void check_kalman_against_mvn(const kalman_target *e)
{
    const double alpha = 1.2, beta = 0.8, sigma = 0.2, tau = 0.3, m1 = 5.0, s1 = 0.7;
    size_t n = 8;
    double l[8], d[8];
    int obs[8] = {1, 1, 0, 1, 1, 1, 0, 1};
    for (size_t t = 0; t < n; t++) {
        l[t] = obs[t] ? e->l[t] : NAN;
        d[t] = 0.1 * (double)t;
    }
    double mean[8], cov[8][8];
    mean[0] = m1;
    cov[0][0] = s1 * s1;
    for (size_t t = 1; t < n; t++) {
        mean[t] = alpha + beta * mean[t - 1];
        for (size_t u = 0; u < t; u++)
            cov[t][u] = cov[u][t] = beta * cov[t - 1][u];
        cov[t][t] = beta * beta * cov[t - 1][t - 1] + sigma * sigma;
    }
    /* Observed components: z = x + d + tau e. */
    size_t k = 0, idx[8];
    for (size_t t = 0; t < n; t++)
        if (obs[t])
            idx[k++] = t;
    double a[8][8], v[8];
    for (size_t i = 0; i < k; i++) {
        v[i] = l[idx[i]] - mean[idx[i]] - d[idx[i]];
        for (size_t j = 0; j < k; j++)
            a[i][j] = cov[idx[i]][idx[j]] + (i == j ? tau * tau : 0.0);
    }
    /* log N(v; 0, A) by Cholesky. */
    double logdet = 0, q = 0, L[8][8] = {{0}};
    for (size_t i = 0; i < k; i++)
        for (size_t j = 0; j <= i; j++) {
            double s = a[i][j];
            for (size_t r = 0; r < j; r++)
                s -= L[i][r] * L[j][r];
            L[i][j] = i == j ? sqrt(s) : s / L[j][j];
        }
    double w[8];
    for (size_t i = 0; i < k; i++) {
        double s = v[i];
        for (size_t r = 0; r < i; r++)
            s -= L[i][r] * w[r];
        w[i] = s / L[i][i];
        q += w[i] * w[i];
        logdet += 2 * log(L[i][i]);
    }
    double want = -0.5 * ((double)k * log(TWO_PI) + logdet + q);
    double got = kalman_loglik(l, d, n, alpha, beta, sigma, tau, m1, s1, NULL);
    ck_assert_msg(fabs(got - want) < 1e-9, "kalman %g, mvn %g", got, want);
}

typedef struct {
    double mean, mcse;
} estimate;

/* Mean and its Monte Carlo standard error (diagnostics.h: sd / sqrt(ESS)) of draws stored
 * [chain][iter] with a stride. */
static estimate estimate_of(const double *base, size_t n_chains, size_t n_iter, size_t stride)
{
    tf_diag_workspace *w = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_diag_workspace_alloc(n_chains, n_iter, &w, &err), TF_OK);
    const double *chains[8];
    for (size_t c = 0; c < n_chains; c++)
        chains[c] = base + c * n_iter * stride;
    tf_diag_summary d;
    ck_assert_int_eq(tf_diag_summarise(w, chains, n_chains, n_iter, stride, &d, &err), TF_OK);
    tf_diag_workspace_free(w);
    estimate e = {d.mean, d.mcse_mean};
    return e;
}

#define EXACT_CHAINS 4

/* Exactness (Andrieu, Doucet & Holenstein 2010, Theorem 4: PMMH leaves the exact posterior
 * invariant): Gompertz with log-normal counting error is linear-Gaussian, so the Kalman filter
 * gives its likelihood exactly (Dennis et al. 2006, Ecological Monographs 76:323). A plain
 * Metropolis-Hastings run on that likelihood, with the same priors and transforms, is the
 * reference; the PMMH posterior means of every parameter and of the latent log-abundance in an
 * unsurveyed and in the last year must agree with it within Z_TOL combined Monte Carlo standard
 * errors. Over the 12 comparisons (with and without delayed acceptance) a 4.5-sigma miss has
 * probability about 8e-5 for a correct sampler. */
#define Z_TOL 4.5
START_TEST(pmmh_matches_exact_likelihood_posterior)
{
    setup su;
    make_setup(&su, "lognormal");
    check_lognormal_density(su.m);
    kalman_target e;
    ck_assert(kalman_target_init(&e, su.post, su.s));
    check_kalman_against_mvn(&e);

    /* The reference: exact-likelihood chains with the Kalman smoother's means as their "path",
     * so that the latent mean is Rao-Blackwellised. */
    size_t warm = sanitized() ? 2000 : 5000, keep = sanitized() ? 8000 : 40000, d = tf_posterior_dim(su.post);
    double *ex_theta = malloc(EXACT_CHAINS * keep * d * sizeof(double));
    double *ex_path = malloc(EXACT_CHAINS * keep * T_YEARS * sizeof(double));
    ck_assert_ptr_nonnull(ex_theta);
    ck_assert_ptr_nonnull(ex_path);
    tf_chain_target t = {.dim = d, .n_path = T_YEARS, .ctx = &e, .log_prior = kalman_target_log_prior,
                         .log_lik = kalman_target_log_lik};
    for (size_t c = 0; c < EXACT_CHAINS; c++) {
        tf_chain *ch = tf_chain_alloc(&t, NULL);
        ck_assert_ptr_nonnull(ch);
        uint64_t keys[2] = {99, c};
        tf_rng rng;
        tf_rng_derive(&rng, 5, keys, 2);
        double theta0[TF_MAX_PARAMS], z0[TF_MAX_PARAMS], cov[TF_MAX_PARAMS * TF_MAX_PARAMS] = {0};
        for (size_t i = 0; i < d; i++)
            cov[i * d + i] = 0.01;
        tf_error err;
        tf_error_init(&err);
        do
            tf_posterior_draw(su.post, &rng, theta0, z0);
        while (tf_chain_init(ch, z0, cov, &rng, &err) != TF_OK);
        for (size_t it = 0; it < warm; it++)
            tf_chain_step(ch);
        tf_chain_set_adapt(ch, 0);
        for (size_t it = 0; it < keep; it++) {
            tf_chain_step(ch);
            memcpy(ex_theta + (c * keep + it) * d, tf_chain_theta(ch), d * sizeof(double));
            memcpy(ex_path + (c * keep + it) * T_YEARS, tf_chain_path(ch), T_YEARS * sizeof(double));
        }
        tf_chain_free(ch);
    }

    /* The PMMH run stops by the default rule (pmmh.h: R-hat <= 1.01, bulk and tail ESS >= 400):
     * this checks the kernel and that stopping on the draws' own diagnostics leaves no bias
     * beyond the Monte Carlo error (Jones, Haran, Caffo & Neath 2006, JASA 101:1537). Under the
     * sanitizers, a short fixed length. The second run screens every proposal first (delayed
     * acceptance, chain.h): it must agree with the exact sampler just as well. */
    for (int delayed = 0; delayed < 2; delayed++) {
    tf_pmmh_options opt = tf_pmmh_default_options();
    opt.n_threads = 2;
    opt.seed = 11;
    opt.delayed = delayed;
    if (sanitized()) {
        opt.min_iter = opt.max_iter = 1000;
        opt.n_warmup = 1500;
    } else {
        opt.n_warmup = 4000;
    }
    tf_fit *fit = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &opt, NULL, NULL, NULL, &fit, &err), TF_OK);
    ck_assert_ptr_nonnull(fit);
    if (!sanitized()) {
        /* It stopped by the rule, and the rule held where it stopped. */
        ck_assert(tf_fit_settings_of(fit)->stopped_early);
        ck_assert(tf_fit_meets(fit, TF_FIT_RHAT_MAX, opt.min_ess));
        ck_assert_uint_ge(tf_fit_settings_of(fit)->n_iterations, opt.min_iter);
    }
    /* The screen rejected some proposals (without a filter run) only when on. */
    ck_assert_int_eq(tf_fit_settings_of(fit)->delayed, delayed);
    ck_assert(delayed ? tf_fit_settings_of(fit)->screened > 0.05 : tf_fit_settings_of(fit)->screened == 0);
    for (size_t p = 0; p < d; p++) {
        estimate ex = estimate_of(ex_theta + p, EXACT_CHAINS, keep, d);
        estimate pm = estimate_of(tf_fit_draws(fit) + p, tf_fit_n_chains(fit), tf_fit_n_iter(fit), d);
        double se = sqrt(ex.mcse * ex.mcse + pm.mcse * pm.mcse);
        ck_assert_msg(fabs(ex.mean - pm.mean) < Z_TOL * se, "%s (delayed %d): exact %g, PMMH %g, combined MCSE %g",
                      tf_model_param_name(su.m, p), delayed, ex.mean, pm.mean, se);
        ck_assert(fabs(pm.mean - tf_fit_param(fit, p)->mean) < 1e-9 * fabs(pm.mean));
    }
    size_t years[2] = {MISSING_YEAR, T_YEARS - 1};
    for (int k = 0; k < 2; k++) {
        estimate ex = estimate_of(ex_path + years[k], EXACT_CHAINS, keep, T_YEARS);
        estimate pm = estimate_of(tf_fit_paths(fit) + years[k], tf_fit_n_chains(fit), tf_fit_n_iter(fit), T_YEARS);
        double se = sqrt(ex.mcse * ex.mcse + pm.mcse * pm.mcse);
        ck_assert_msg(fabs(ex.mean - pm.mean) < Z_TOL * se, "x[%zu]: exact %g, PMMH %g, combined MCSE %g", years[k],
                      ex.mean, pm.mean, se);
    }
    /* Every kept draw holds a finite likelihood and a finite path. */
    for (size_t k = 0; k < tf_fit_n_draws(fit); k++) {
        ck_assert(isfinite(tf_fit_logliks(fit)[k]));
        for (size_t yr = 0; yr < T_YEARS; yr++)
            ck_assert(isfinite(tf_fit_paths(fit)[k * T_YEARS + yr]));
    }
    tf_fit_free(fit);
    }
    free(ex_theta);
    free(ex_path);
    free_setup(&su);
}
END_TEST

/* A short run by need: a low ESS target, so that it stops before its maximum, with a small
 * store of kept draws, so that the thinning doubles on the way. */
static tf_pmmh_options short_run(void)
{
    tf_pmmh_options opt = tf_pmmh_default_options();
    opt.min_iter = 300;
    opt.max_iter = 6000;
    opt.min_ess = 40;
    opt.max_kept = 160;
    opt.thin = 2;
    opt.n_warmup = 200;
    opt.seed = 3;
    return opt;
}

/* Each chain has its own stream derived from (seed, population, model, chain), so the draws
 * must not depend on how chains are shared among threads (common practice, no source). */
START_TEST(same_result_for_any_thread_count)
{
    setup su;
    make_setup(&su, "poisson");
    tf_fit *fits[3] = {NULL, NULL, NULL};
    size_t threads[3] = {1, 2, 3};
    for (int k = 0; k < 3; k++) {
        tf_pmmh_options opt = short_run();
        opt.n_threads = threads[k];
        opt.correlated = k == 2;   /* the third run checks the correlated method the same way */
        tf_error err;
        tf_error_init(&err);
        ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &opt, NULL, NULL, NULL, &fits[k], &err), TF_OK);
    }
    size_t n = tf_fit_n_draws(fits[0]);
    /* The same stop, decided from the draws only: the length, the thinning and the draws. */
    ck_assert_uint_eq(n, tf_fit_n_draws(fits[1]));
    ck_assert_uint_eq(tf_fit_settings_of(fits[0])->n_iterations, tf_fit_settings_of(fits[1])->n_iterations);
    ck_assert_uint_eq(tf_fit_settings_of(fits[0])->thin, tf_fit_settings_of(fits[1])->thin);
    ck_assert(memcmp(tf_fit_draws(fits[0]), tf_fit_draws(fits[1]), n * 3 * sizeof(double)) == 0);
    ck_assert(memcmp(tf_fit_paths(fits[0]), tf_fit_paths(fits[1]), n * T_YEARS * sizeof(double)) == 0);
    ck_assert(memcmp(tf_fit_logliks(fits[0]), tf_fit_logliks(fits[1]), n * sizeof(double)) == 0);
    ck_assert_uint_eq(tf_fit_settings_of(fits[0])->n_particles, tf_fit_settings_of(fits[1])->n_particles);
    ck_assert(tf_fit_settings_of(fits[2])->correlated);
    tf_pmmh_options again = short_run();
    again.n_threads = 3;
    again.correlated = 1;
    tf_fit *f3 = NULL;
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &again, NULL, NULL, NULL, &f3, NULL), TF_OK);
    ck_assert_uint_eq(tf_fit_n_draws(fits[2]), tf_fit_n_draws(f3));
    ck_assert(memcmp(tf_fit_draws(fits[2]), tf_fit_draws(f3), tf_fit_n_draws(f3) * 3 * sizeof(double)) == 0);
    /* Different chains differ: the streams are not shared. */
    size_t last = tf_fit_n_iter(fits[0]) - 1;
    ck_assert(memcmp(tf_fit_draw(fits[0], 0, last), tf_fit_draw(fits[0], 1, last), 3 * sizeof(double)) != 0);
    for (int k = 0; k < 3; k++)
        tf_fit_free(fits[k]);
    tf_fit_free(f3);
    free_setup(&su);
}
END_TEST

/* A run whose kept draws fill their store drops every second one and goes on at twice the
 * thinning; it keeps exactly the draws of a run planned with twice the thinning from the start:
 * same chains, same frozen kernel, same streams (the kept draws are a deterministic function of
 * the chain's path, whatever the blocks). Fixed length, so that only the halving differs. */
START_TEST(halved_run_equals_run_thinned_twice_as_much)
{
    setup su;
    make_setup(&su, "poisson");
    tf_pmmh_options a = short_run();
    a.min_iter = a.max_iter = 2000;
    a.max_kept = 1000;
    a.thin = 1;
    a.n_threads = 2;
    tf_pmmh_options b = a;
    b.thin = 2;
    b.n_threads = 1;
    tf_fit *fa = NULL, *fb = NULL;
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &a, NULL, NULL, NULL, &fa, NULL), TF_OK);
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &b, NULL, NULL, NULL, &fb, NULL), TF_OK);
    ck_assert_uint_eq(tf_fit_settings_of(fa)->n_doublings, 1);
    ck_assert_uint_eq(tf_fit_settings_of(fa)->thin, 2);
    ck_assert_uint_eq(tf_fit_settings_of(fb)->n_doublings, 0);
    ck_assert_uint_eq(tf_fit_settings_of(fa)->n_iterations, 2000);
    ck_assert(!tf_fit_settings_of(fa)->stopped_early);
    size_t n = tf_fit_n_draws(fa);
    ck_assert_uint_eq(n, 4 * 1000);
    ck_assert_uint_eq(n, tf_fit_n_draws(fb));
    ck_assert(memcmp(tf_fit_draws(fa), tf_fit_draws(fb), n * 3 * sizeof(double)) == 0);
    ck_assert(memcmp(tf_fit_paths(fa), tf_fit_paths(fb), n * T_YEARS * sizeof(double)) == 0);
    ck_assert(memcmp(tf_fit_logliks(fa), tf_fit_logliks(fb), n * sizeof(double)) == 0);
    for (size_t c = 0; c < tf_fit_n_chains(fa); c++)
        ck_assert_double_eq(tf_fit_acceptance(fa, c), tf_fit_acceptance(fb, c));
    for (size_t p = 0; p < 3; p++)
        ck_assert_double_eq(tf_fit_param(fa, p)->ess_bulk, tf_fit_param(fb, p)->ess_bulk);
    tf_fit_free(fa);
    tf_fit_free(fb);
    free_setup(&su);
}
END_TEST

/* The stopping rule: a run by need stops at the first block end, at or after the minimum, where
 * tf_fit_meets holds, and its draws are those of a run of fixed length that long (the rule
 * reads the draws and changes none). A run that cannot meet its target runs to its maximum. */
START_TEST(run_stops_where_the_checks_first_pass)
{
    setup su;
    make_setup(&su, "poisson");
    tf_pmmh_options a = short_run();
    tf_fit *fa = NULL, *fb = NULL, *fc = NULL;
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &a, NULL, NULL, NULL, &fa, NULL), TF_OK);
    const tf_fit_settings *sa = tf_fit_settings_of(fa);
    ck_assert(sa->stopped_early);
    ck_assert(tf_fit_meets(fa, TF_FIT_RHAT_MAX, a.min_ess));
    ck_assert_uint_ge(sa->n_iterations, a.min_iter);
    ck_assert_uint_lt(sa->n_iterations, a.max_iter);
    ck_assert_uint_le(tf_fit_n_iter(fa), a.max_kept);

    /* The same run of fixed length: the same draws, and the rule already held there. */
    tf_pmmh_options b = a;
    b.min_iter = b.max_iter = sa->n_iterations;
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &b, NULL, NULL, NULL, &fb, NULL), TF_OK);
    size_t n = tf_fit_n_draws(fa);
    ck_assert_uint_eq(n, tf_fit_n_draws(fb));
    ck_assert(memcmp(tf_fit_draws(fa), tf_fit_draws(fb), n * 3 * sizeof(double)) == 0);
    ck_assert(tf_fit_meets(fb, TF_FIT_RHAT_MAX, a.min_ess));

    /* An ESS target that 4 x 160 kept draws can never show runs to the maximum. */
    tf_pmmh_options c = a;
    c.min_ess = 1e6;
    c.max_iter = 1500;
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &c, NULL, NULL, NULL, &fc, NULL), TF_OK);
    ck_assert(!tf_fit_settings_of(fc)->stopped_early);
    /* The last block ends at the maximum rounded down to a whole kept draw. */
    ck_assert_uint_le(tf_fit_settings_of(fc)->n_iterations, 1500);
    ck_assert_uint_gt(tf_fit_settings_of(fc)->n_iterations + tf_fit_settings_of(fc)->thin, 1500);
    ck_assert_uint_le(tf_fit_n_iter(fc), c.max_kept);
    tf_fit_free(fa);
    tf_fit_free(fb);
    tf_fit_free(fc);
    free_setup(&su);
}
END_TEST

static volatile sig_atomic_t stop_flag;
static size_t n_reports;

static void stop_on_first_report(void *ctx, const tf_pmmh_progress *p)
{
    (void)ctx;
    ck_assert_uint_eq(p->n_chains, 4);
    ck_assert_uint_eq(p->total, 200 + 1000000);
    n_reports++;
    stop_flag = 1;
}

START_TEST(stop_flag_interrupts_and_returns_nothing)
{
    setup su;
    make_setup(&su, "poisson");
    tf_pmmh_options opt = short_run();
    opt.n_threads = 2;
    opt.min_iter = opt.max_iter = 1000000;   /* hours if not interrupted */
    opt.thin = 1;
    tf_fit *fit = (tf_fit *)&opt;   /* must be overwritten with NULL */
    tf_error err;
    tf_error_init(&err);
    stop_flag = 0;
    n_reports = 0;
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &opt, &stop_flag, stop_on_first_report, NULL, &fit, &err),
                     TF_ERR_INTERRUPTED);
    ck_assert_ptr_null(fit);
    ck_assert_uint_ge(n_reports, 1);
    /* Set before the start: nothing runs. */
    tf_error_init(&err);
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &opt, &stop_flag, NULL, NULL, &fit, &err), TF_ERR_INTERRUPTED);
    ck_assert_ptr_null(fit);
    free_setup(&su);
}
END_TEST

START_TEST(bad_settings_are_refused)
{
    setup su;
    make_setup(&su, "poisson");
    tf_fit *fit = NULL;
    tf_pmmh_options bad[8];
    for (int k = 0; k < 8; k++)
        bad[k] = short_run();
    bad[0].n_chains = 0;
    bad[1].max_iter = bad[1].min_iter - 1;
    bad[2].thin = 0;
    bad[3].n_warmup = 5;
    bad[4].rho = 1.0;
    bad[5].min_ess = 0;
    bad[6].max_kept = 7;
    bad[7].thin = bad[7].min_iter + 1;
    for (int k = 0; k < 8; k++) {
        tf_error err;
        tf_error_init(&err);
        ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &bad[k], NULL, NULL, NULL, &fit, &err), TF_ERR_INVALID);
        ck_assert_ptr_null(fit);
        ck_assert_uint_ge(err.n_items, 1);
    }
    free_setup(&su);
}
END_TEST

/* A fixed particle count is used as given, and its spread is still measured and reported. */
START_TEST(given_particle_count_is_kept)
{
    setup su;
    make_setup(&su, "poisson");
    tf_pmmh_options opt = short_run();
    opt.n_particles = 37;
    opt.min_iter = opt.max_iter = 300;   /* 150 kept draws: within the store, thinning stays 2 */
    tf_fit *fit = NULL;
    ck_assert_int_eq(tf_pmmh_run(su.post, su.s, &opt, NULL, NULL, NULL, &fit, NULL), TF_OK);
    ck_assert_uint_eq(tf_fit_settings_of(fit)->n_particles, 37);
    ck_assert(tf_fit_settings_of(fit)->loglik_sd > 0 && isfinite(tf_fit_settings_of(fit)->loglik_sd));
    ck_assert_uint_eq(tf_fit_settings_of(fit)->thin, 2);
    ck_assert_ptr_eq(tf_fit_posterior(fit), su.post);
    ck_assert_ptr_eq(tf_fit_model(fit), su.m);
    ck_assert_ptr_eq(tf_fit_series(fit), su.s);
    for (size_t c = 0; c < tf_fit_n_chains(fit); c++)
        ck_assert(tf_fit_acceptance(fit, c) > 0 && tf_fit_acceptance(fit, c) < 1);
    tf_fit_free(fit);
    free_setup(&su);
}
END_TEST

/* The screen of delayed acceptance is an extended Kalman filter fed with Laplace
 * pseudo-observations; for Gompertz growth (linear on the log scale) and log-normal counting
 * error (exactly Gaussian in x) both approximations are exact, so it must give the Kalman
 * filter's likelihood (kalman_ref.h) to rounding, at the truth and at points far from it. For
 * Poisson counts it is only an approximation: finite, and within a few log units of the
 * particle filter's estimate near the truth (a loose bound: it screens, it does not decide). */
START_TEST(screen_is_exact_for_the_linear_gaussian_model)
{
    setup su;
    make_setup(&su, "lognormal");
    kalman_target e;
    ck_assert(kalman_target_init(&e, su.post, su.s));
    tf_screen *sc = tf_screen_alloc(su.m, su.s);
    ck_assert_ptr_nonnull(sc);
    /* The Kalman filter's likelihood is that of ln y; the counts' density has the Jacobian
     * 1 / y of each count besides (check_lognormal_density). */
    double jacobian = 0;
    for (size_t t = 0; t < T_YEARS; t++)
        if (!isnan(tf_series_counts(su.s)[t]))
            jacobian -= log(tf_series_counts(su.s)[t]);
    const double pts[4][4] = {{0.4, 300.0, 0.12, 0.15}, {1.5, 80.0, 0.5, 0.05}, {0.05, 2000.0, 0.02, 0.6},
                              {0.9, 300.0, 0.3, 0.3}};
    for (int k = 0; k < 4; k++) {
        double want = kalman_target_log_lik(&e, pts[k], NULL, NULL, NULL) + jacobian;
        double got = tf_screen_loglik(sc, pts[k]);
        ck_assert_msg(fabs(got - want) < 1e-8 * fabs(want), "point %d: screen %.12g, Kalman %.12g", k, got, want);
    }
    double outside[4] = {0.4, -1.0, 0.12, 0.15};
    ck_assert(tf_screen_loglik(sc, outside) == -INFINITY);
    tf_screen_free(sc);
    free_setup(&su);

    make_setup(&su, "poisson");
    sc = tf_screen_alloc(su.m, su.s);
    tf_filter *f = tf_filter_alloc(su.m, su.s, 20000);
    ck_assert_ptr_nonnull(f);
    tf_rng rng;
    tf_rng_derive(&rng, 3, NULL, 0);
    const double truth[3] = {0.4, 300.0, 0.12};
    double ll = tf_filter_loglik(f, truth, &rng, NULL), s = tf_screen_loglik(sc, truth);
    ck_assert_msg(isfinite(s) && fabs(s - ll) < 5.0, "screen %g, filter %g", s, ll);
    tf_filter_free(f);
    tf_screen_free(sc);
    free_setup(&su);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("pmmh");
    TCase *tc = tcase_create("run");
    tcase_set_timeout(tc, 300);
    tcase_add_test(tc, pmmh_matches_exact_likelihood_posterior);
    tcase_add_test(tc, screen_is_exact_for_the_linear_gaussian_model);
    tcase_add_test(tc, same_result_for_any_thread_count);
    tcase_add_test(tc, halved_run_equals_run_thinned_twice_as_much);
    tcase_add_test(tc, run_stops_where_the_checks_first_pass);
    tcase_add_test(tc, stop_flag_interrupts_and_returns_nothing);
    tcase_add_test(tc, bad_settings_are_refused);
    tcase_add_test(tc, given_particle_count_is_kept);
    suite_add_tcase(s, tc);
    return s;
}
