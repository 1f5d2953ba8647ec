/* Unit tests for the PMMH chain's kernel against analytic Gaussian targets, exact and with noisy
 * (pseudo-marginal) likelihood estimates. */
#include "tf_test.h"
#include <math.h>
#include <string.h>

#include "sampler/chain.h"

/* Target: prior z ~ N(0, 4 I) (on z directly, no Jacobian), "likelihood" Gaussian in z with
 * mean m and precision P. The posterior is Gaussian with precision P + I/4 and mean
 * (P + I/4)^-1 P m. An optional noise term makes the estimate of exp(log_lik) unbiased but
 * random: log L^ = log L + s W - s^2/2 with W ~ N(0,1), so E[L^] = L and the pseudo-marginal
 * chain targets the same posterior (Andrieu & Roberts 2009, section 2). */
#define D 3
typedef struct {
    double m[D];
    double p[D][D];
    double noise_sd;    /* s above; 0 = exact */
    int nan_above;      /* if set, log_lik is NaN when z[0] > 1 (tests rejection) */
    size_t n_calls;
} gauss_ctx;

static double g_log_prior(void *ctx, const double *z, double *theta)
{
    (void)ctx;
    double s = 0;
    for (int i = 0; i < D; i++) {
        theta[i] = z[i];
        s += -0.5 * z[i] * z[i] / 4.0;
    }
    return s;
}

static double g_quad(const gauss_ctx *g, const double *x)
{
    double q = 0;
    for (int i = 0; i < D; i++)
        for (int j = 0; j < D; j++)
            q += (x[i] - g->m[i]) * g->p[i][j] * (x[j] - g->m[j]);
    return -0.5 * q;
}

static double g_log_lik_rng(void *ctx, const double *theta, const double *aux, tf_rng *rng,
                            double *path)
{
    gauss_ctx *g = ctx;
    (void)aux;
    g->n_calls++;
    if (g->nan_above && theta[0] > 1.0)
        return NAN;
    double w = g->noise_sd > 0 ? tf_rng_normal(rng) : 0.0;
    if (path)
        for (int i = 0; i < D; i++)
            path[i] = 10.0 * theta[i];
    return g_quad(g, theta) + g->noise_sd * w - 0.5 * g->noise_sd * g->noise_sd;
}

/* A deliberately poor screen for delayed acceptance: the exact log-likelihood's quadratic, but
 * centred 0.4 away in every coordinate and 30 % flatter. Delayed acceptance must stay exact with
 * any screen; a poor one only costs more second-stage rejections. */
static double g_log_screen(void *ctx, const double *theta)
{
    const gauss_ctx *g = ctx;
    double x[D];
    for (int i = 0; i < D; i++)
        x[i] = theta[i] - 0.4;
    return 0.7 * g_quad(g, x);
}

/* Correlated version: W = sum(aux) / sqrt(n_aux), a function of the auxiliary normals only. */
#define N_AUX 64
static double g_log_lik_aux(void *ctx, const double *theta, const double *aux, tf_rng *rng,
                            double *path)
{
    gauss_ctx *g = ctx;
    (void)rng;
    (void)path;
    double s = 0;
    for (int i = 0; i < N_AUX; i++)
        s += aux[i];
    double w = s / sqrt((double)N_AUX);
    return g_quad(g, theta) + g->noise_sd * w - 0.5 * g->noise_sd * g->noise_sd;
}

static void setup_target(gauss_ctx *g)
{
    memset(g, 0, sizeof *g);
    /* A correlated likelihood with very different scales, so that adaptation has work to do. */
    double m[D] = {1.0, -2.0, 0.5};
    double p[D][D] = {{4.0, 1.5, 0.0}, {1.5, 1.0, 0.2}, {0.0, 0.2, 25.0}};
    memcpy(g->m, m, sizeof m);
    memcpy(g->p, p, sizeof p);
}

/* Posterior mean and covariance by inverting the 3x3 precision A = P + I/4 (cofactors). */
static void exact_posterior(const gauss_ctx *g, double mean[D], double cov[D][D])
{
    double a[D][D];
    for (int i = 0; i < D; i++)
        for (int j = 0; j < D; j++)
            a[i][j] = g->p[i][j] + (i == j ? 0.25 : 0.0);
    double det = a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1]) -
                 a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0]) +
                 a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]);
    for (int i = 0; i < D; i++)
        for (int j = 0; j < D; j++) {
            int r0 = (j + 1) % 3, r1 = (j + 2) % 3, c0 = (i + 1) % 3, c1 = (i + 2) % 3;
            cov[i][j] = (a[r0][c0] * a[r1][c1] - a[r0][c1] * a[r1][c0]) / det;
        }
    double pm[D];
    for (int i = 0; i < D; i++) {
        pm[i] = 0;
        for (int j = 0; j < D; j++)
            pm[i] += g->p[i][j] * g->m[j];
    }
    for (int i = 0; i < D; i++) {
        mean[i] = 0;
        for (int j = 0; j < D; j++)
            mean[i] += cov[i][j] * pm[j];
    }
}

/* Monte Carlo standard error of the mean of x[0..n) by non-overlapping batch means with
 * n_batch batches (Flegal & Jones 2010, Annals of Statistics 38:1034, eq. 6). */
static double batch_mcse(const double *x, size_t n, size_t n_batch)
{
    size_t b = n / n_batch;
    double grand = 0, bm[200];
    for (size_t k = 0; k < n_batch; k++) {
        double s = 0;
        for (size_t i = 0; i < b; i++)
            s += x[k * b + i];
        bm[k] = s / (double)b;
        grand += bm[k];
    }
    grand /= (double)n_batch;
    double v = 0;
    for (size_t k = 0; k < n_batch; k++)
        v += (bm[k] - grand) * (bm[k] - grand);
    v /= (double)(n_batch - 1);
    return sqrt(v / (double)n_batch);
}

#define WARMUP 3000
#define KEEP 60000
/* Each check is |estimate - exact| < Z_TOL MCSE; over the 6 checks of one run (and the runs of
 * this file) a 4.5-sigma miss has probability about 7e-6 each under a correct kernel. */
#define Z_TOL 4.5

static double draws[D][KEEP], sq[D][KEEP];

static void run_and_compare(tf_chain_target *t, double rho, uint64_t seed, double *acc_rate)
{
    gauss_ctx *g = t->ctx;
    double mean[D], cov[D][D];
    exact_posterior(g, mean, cov);

    tf_chain_options opt = tf_chain_default_options();
    opt.rho = rho;
    tf_chain *c = tf_chain_alloc(t, &opt);
    ck_assert_ptr_nonnull(c);
    double z0[D] = {0, 0, 0};
    double c0[D * D] = {0.1, 0, 0, 0, 0.1, 0, 0, 0, 0.1};
    tf_rng rng;
    tf_rng_derive(&rng, seed, NULL, 0);
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_chain_init(c, z0, c0, &rng, &err), TF_OK);
    for (int i = 0; i < WARMUP; i++)
        tf_chain_step(c);
    tf_chain_set_adapt(c, 0);
    tf_chain_reset_counts(c);
    for (int it = 0; it < KEEP; it++) {
        tf_chain_step(c);
        const double *z = tf_chain_z(c);
        ck_assert(isfinite(tf_chain_loglik(c)));
        for (int i = 0; i < D; i++) {
            draws[i][it] = z[i];
            sq[i][it] = (z[i] - mean[i]) * (z[i] - mean[i]);
        }
    }
    *acc_rate = (double)tf_chain_n_accepted(c) / (double)tf_chain_n_steps(c);
    for (int i = 0; i < D; i++) {
        double m = 0, v = 0;
        for (int it = 0; it < KEEP; it++) {
            m += draws[i][it];
            v += sq[i][it];
        }
        m /= KEEP;
        v /= KEEP;
        double se_m = batch_mcse(draws[i], KEEP, 100), se_v = batch_mcse(sq[i], KEEP, 100);
        ck_assert_msg(fabs(m - mean[i]) < Z_TOL * se_m, "dim %d mean %g exact %g mcse %g", i, m,
                      mean[i], se_m);
        ck_assert_msg(fabs(v - cov[i][i]) < Z_TOL * se_v, "dim %d var %g exact %g mcse %g", i, v,
                      cov[i][i], se_v);
    }
    /* The frozen proposal should have learnt the posterior covariance: the running covariance
     * over 3000 warm-up draws (blended with 100 pseudo-draws of C0) is within 35 % of the
     * exact variances (a loose bound: the relative sd of a variance from ~3000 autocorrelated
     * draws is roughly 10 %). */
    double pc[D * D];
    tf_chain_proposal_cov(c, pc);
    for (int i = 0; i < D; i++)
        ck_assert_msg(fabs(pc[i * D + i] / cov[i][i] - 1.0) < 0.35, "proposal var %d: %g vs %g", i,
                      pc[i * D + i], cov[i][i]);
    tf_chain_free(c);
}

START_TEST(exact_gaussian_target)
{
    gauss_ctx g;
    setup_target(&g);
    tf_chain_target t = {.dim = D, .ctx = &g, .log_prior = g_log_prior, .log_lik = g_log_lik_rng};
    double acc;
    run_and_compare(&t, 0.0, 11, &acc);
    /* Optimal random-walk scaling on a Gaussian target in 3 dimensions accepts about 0.3
     * (Gelman, Roberts & Gilks 1996, Bayesian Statistics 5, Table 1: 0.44 in 1-d down to
     * 0.23 as d grows); a wrong covariance would give a rate far from this band. */
    ck_assert_msg(acc > 0.22 && acc < 0.42, "acceptance %g", acc);
}
END_TEST

START_TEST(noisy_gaussian_target_pseudo_marginal)
{
    gauss_ctx g;
    setup_target(&g);
    g.noise_sd = 1.2;
    tf_chain_target t = {.dim = D, .ctx = &g, .log_prior = g_log_prior, .log_lik = g_log_lik_rng};
    double acc;
    run_and_compare(&t, 0.0, 12, &acc);
    /* Noise lowers acceptance (Doucet, Pitt, Deligiannidis & Kohn 2015, Biometrika 102:295). */
    ck_assert_msg(acc < 0.25, "acceptance %g", acc);
}
END_TEST

START_TEST(noisy_gaussian_target_correlated)
{
    gauss_ctx g;
    setup_target(&g);
    g.noise_sd = 3.0;   /* far too noisy for the standard method; rho = 0.99 makes it work */
    tf_chain_target t = {.dim = D, .n_aux = N_AUX, .ctx = &g, .log_prior = g_log_prior,
                         .log_lik = g_log_lik_aux};
    double acc;
    run_and_compare(&t, 0.99, 13, &acc);
    ck_assert_msg(acc > 0.1, "acceptance %g", acc);
}
END_TEST

/* Delayed acceptance (Christen & Fox 2005) with noisy estimates and a poor screen samples the
 * exact posterior (the same mean and variance checks), and spares likelihood estimates: every
 * screened-out proposal is one estimate fewer. */
START_TEST(delayed_acceptance_keeps_the_target)
{
    gauss_ctx g;
    setup_target(&g);
    g.noise_sd = 1.0;
    tf_chain_target t = {.dim = D, .ctx = &g, .log_prior = g_log_prior, .log_lik = g_log_lik_rng,
                         .log_screen = g_log_screen};
    double acc;
    g.n_calls = 0;
    run_and_compare(&t, 0.0, 14, &acc);
    /* 1 initial estimate + one per proposal that passed the screen (and had a finite prior). */
    ck_assert_msg(g.n_calls < (size_t)(WARMUP + KEEP) * 9 / 10, "%zu estimates in %d steps", g.n_calls,
                  WARMUP + KEEP);
    ck_assert_msg(acc > 0.05, "acceptance %g", acc);
}
END_TEST

/* The two stages together satisfy detailed balance with respect to the target
 * pi = exp(ll + prior) for any screen s: pi(a) alpha(a -> b) = pi(b) alpha(b -> a) with
 * alpha = min(1, exp(s_b + p_b - s_a - p_a)) exp(tf_chain_delayed_log_alpha2(ll_b, ll_a, s_b, s_a))
 * (Christen & Fox 2005, section 2). Checked on random values, and on one by hand. */
START_TEST(delayed_acceptance_second_stage_ratio)
{
    tf_rng rng;
    tf_rng_derive(&rng, 21, NULL, 0);
    for (int k = 0; k < 10000; k++) {
        double la = 5 * tf_rng_normal(&rng), lb = 5 * tf_rng_normal(&rng);
        double pa = tf_rng_normal(&rng), pb = tf_rng_normal(&rng);
        double sa = la + 3 * tf_rng_normal(&rng), sb = lb + 3 * tf_rng_normal(&rng);
        double ab = fmin(0.0, sb + pb - sa - pa) + tf_chain_delayed_log_alpha2(lb, la, sb, sa);
        double ba = fmin(0.0, sa + pa - sb - pb) + tf_chain_delayed_log_alpha2(la, lb, sa, sb);
        ck_assert_msg(fabs((la + pa + ab) - (lb + pb + ba)) < 1e-9, "a %g %g %g, b %g %g %g", la, pa, sa, lb, pb, sb);
    }
    /* By hand: the screen promised a gain of 2 that the estimate shows as 0.5: exp(-1.5). */
    ck_assert_double_eq_tol(tf_chain_delayed_log_alpha2(-10.5, -11.0, -3.0, -5.0), -1.5, 1e-15);
    ck_assert_double_eq(tf_chain_delayed_log_alpha2(-10.0, -11.0, -3.0, -3.5), 0.0);
}
END_TEST

START_TEST(rejects_nan_and_keeps_path_of_accepted_state)
{
    gauss_ctx g;
    setup_target(&g);
    g.nan_above = 1;
    g.noise_sd = 0.5;
    tf_chain_target t = {.dim = D, .n_path = D, .ctx = &g, .log_prior = g_log_prior,
                         .log_lik = g_log_lik_rng};
    tf_chain *c = tf_chain_alloc(&t, NULL);
    ck_assert_ptr_nonnull(c);
    double z0[D] = {0, 0, 0}, c0[D * D] = {1, 0, 0, 0, 1, 0, 0, 0, 1};
    tf_rng rng;
    tf_rng_derive(&rng, 5, NULL, 0);
    ck_assert_int_eq(tf_chain_init(c, z0, c0, &rng, NULL), TF_OK);
    for (int it = 0; it < 5000; it++) {
        tf_chain_step(c);
        const double *theta = tf_chain_theta(c), *path = tf_chain_path(c);
        ck_assert(isfinite(tf_chain_loglik(c)));
        ck_assert(theta[0] <= 1.0);
        for (int i = 0; i < D; i++)
            ck_assert(path[i] == 10.0 * theta[i]);
    }
    ck_assert_uint_gt(tf_chain_n_invalid(c), 0);
    ck_assert_uint_eq(tf_chain_n_steps(c), 5000);
    tf_chain_free(c);
}
END_TEST

/* Monte Carlo within Metropolis re-estimates the current point each step: two estimates per
 * step, and with a very noisy estimate it keeps moving where the exact pseudo-marginal chain
 * sticks (O'Neill et al. 2000; the sticking is Andrieu & Roberts 2009, section 1). */
START_TEST(refresh_mode_reestimates_current_point)
{
    gauss_ctx g;
    setup_target(&g);
    g.noise_sd = 4.0;
    tf_chain_target t = {.dim = D, .ctx = &g, .log_prior = g_log_prior, .log_lik = g_log_lik_rng};
    double z0[D] = {0, 0, 0}, c0[D * D] = {0.05, 0, 0, 0, 0.5, 0, 0, 0, 0.01};
    size_t accepted[2];
    for (int refresh = 0; refresh < 2; refresh++) {
        tf_chain *c = tf_chain_alloc(&t, NULL);
        tf_rng rng;
        tf_rng_derive(&rng, 21, NULL, 0);
        ck_assert_int_eq(tf_chain_init(c, z0, c0, &rng, NULL), TF_OK);
        tf_chain_set_adapt(c, 0);
        tf_chain_set_refresh(c, refresh);
        g.n_calls = 0;
        for (int it = 0; it < 2000; it++)
            tf_chain_step(c);
        ck_assert_uint_eq(g.n_calls, refresh ? 4000 : 2000);
        accepted[refresh] = tf_chain_n_accepted(c);
        tf_chain_free(c);
    }
    /* With noise sd 4 the exact chain accepts rarely (a typical over-estimate of 4 sd's
     * worth is hard to beat); refreshing the current point removes that barrier. */
    ck_assert_msg(accepted[1] > 3 * accepted[0], "accepted %zu vs %zu", accepted[1], accepted[0]);
}
END_TEST

/* Global scale adaptation (Andrieu & Thoms 2008, Algorithm 4) from a start 1000 times too wide:
 * after warm-up the acceptance rate is near the target 0.234 (the band allows for the
 * Monte Carlo spread of a rate over 20000 correlated steps and for the slowly decaying steps). */
START_TEST(global_scale_reaches_target_acceptance)
{
    gauss_ctx g;
    setup_target(&g);
    tf_chain_target t = {.dim = D, .ctx = &g, .log_prior = g_log_prior, .log_lik = g_log_lik_rng};
    tf_chain_options o = tf_chain_default_options();
    o.target_accept = 0.234;
    o.init_weight = 10;
    tf_chain *c = tf_chain_alloc(&t, &o);
    double z0[D] = {0, 0, 0}, c0[D * D] = {100, 0, 0, 0, 100, 0, 0, 0, 100};
    tf_rng rng;
    tf_rng_derive(&rng, 31, NULL, 0);
    ck_assert_int_eq(tf_chain_init(c, z0, c0, &rng, NULL), TF_OK);
    for (int it = 0; it < 5000; it++)
        tf_chain_step(c);
    tf_chain_set_adapt(c, 0);
    tf_chain_reset_counts(c);
    for (int it = 0; it < 20000; it++)
        tf_chain_step(c);
    double acc = (double)tf_chain_n_accepted(c) / 20000.0;
    ck_assert_msg(acc > 0.18 && acc < 0.29, "acceptance %g, lambda %g", acc,
                  tf_chain_scale_factor(c));
    tf_chain_free(c);
}
END_TEST

START_TEST(same_stream_same_chain)
{
    gauss_ctx g;
    setup_target(&g);
    g.noise_sd = 1.0;
    tf_chain_target t = {.dim = D, .ctx = &g, .log_prior = g_log_prior, .log_lik = g_log_lik_rng};
    tf_chain *a = tf_chain_alloc(&t, NULL), *b = tf_chain_alloc(&t, NULL);
    double z0[D] = {0.3, 0, 0}, c0[D * D] = {1, 0, 0, 0, 1, 0, 0, 0, 1};
    tf_rng rng;
    tf_rng_derive(&rng, 99, NULL, 0);
    ck_assert_int_eq(tf_chain_init(a, z0, c0, &rng, NULL), TF_OK);
    ck_assert_int_eq(tf_chain_init(b, z0, c0, &rng, NULL), TF_OK);
    for (int it = 0; it < 1000; it++) {
        ck_assert_int_eq(tf_chain_step(a), tf_chain_step(b));
        ck_assert(memcmp(tf_chain_z(a), tf_chain_z(b), D * sizeof(double)) == 0);
    }
    tf_chain_free(a);
    tf_chain_free(b);
}
END_TEST

START_TEST(bad_arguments_are_refused)
{
    gauss_ctx g;
    setup_target(&g);
    tf_chain_target t = {.dim = 0, .ctx = &g, .log_prior = g_log_prior, .log_lik = g_log_lik_rng};
    ck_assert_ptr_null(tf_chain_alloc(&t, NULL));
    t.dim = TF_CHAIN_MAX_DIM + 1;
    ck_assert_ptr_null(tf_chain_alloc(&t, NULL));
    t.dim = D;
    t.log_lik = NULL;
    ck_assert_ptr_null(tf_chain_alloc(&t, NULL));
    t.log_lik = g_log_lik_rng;
    tf_chain_options o = tf_chain_default_options();
    o.rho = 1.0;
    ck_assert_ptr_null(tf_chain_alloc(&t, &o));

    tf_chain *c = tf_chain_alloc(&t, NULL);
    ck_assert_ptr_nonnull(c);
    tf_rng rng;
    tf_rng_derive(&rng, 1, NULL, 0);
    tf_error err;
    double z0[D] = {0, 0, 0};
    double not_pd[D * D] = {1, 2, 0, 2, 1, 0, 0, 0, 1};
    tf_error_init(&err);
    ck_assert_int_eq(tf_chain_init(c, z0, not_pd, &rng, &err), TF_ERR_INVALID);
    double asym[D * D] = {1, 0.5, 0, 0, 1, 0, 0, 0, 1};
    tf_error_init(&err);
    ck_assert_int_eq(tf_chain_init(c, z0, asym, &rng, &err), TF_ERR_INVALID);
    g.nan_above = 1;
    double far[D] = {2, 0, 0}, eye[D * D] = {1, 0, 0, 0, 1, 0, 0, 0, 1};
    tf_error_init(&err);
    ck_assert_int_eq(tf_chain_init(c, far, eye, &rng, &err), TF_ERR_NUMERIC);
    ck_assert(isinf(tf_chain_loglik(c)));
    tf_chain_free(c);
    tf_chain_free(NULL);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("chain");
    TCase *tc = tcase_create("kernel");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, exact_gaussian_target);
    tcase_add_test(tc, noisy_gaussian_target_pseudo_marginal);
    tcase_add_test(tc, noisy_gaussian_target_correlated);
    tcase_add_test(tc, delayed_acceptance_keeps_the_target);
    tcase_add_test(tc, delayed_acceptance_second_stage_ratio);
    tcase_add_test(tc, rejects_nan_and_keeps_path_of_accepted_state);
    tcase_add_test(tc, refresh_mode_reestimates_current_point);
    tcase_add_test(tc, global_scale_reaches_target_acceptance);
    tcase_add_test(tc, same_stream_same_chain);
    tcase_add_test(tc, bad_arguments_are_refused);
    suite_add_tcase(s, tc);
    return s;
}
