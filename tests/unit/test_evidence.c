/* Importance sampling squared on targets whose evidence is known in closed form: a Gaussian
 * likelihood under a Gaussian prior, estimated with multiplicative log-normal noise that is
 * unbiased on the natural scale (as a particle filter's estimate is), so the estimator meets the
 * same kind of noisy weights as with the filter. */
#include "tf_test.h"

#include <math.h>
#include <signal.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>

#include "compare/evidence.h"
#include "compare/pareto.h"

#define LN_2PI 1.8378770664093453
#define LN_PI 1.1447298858494002
#define LN_2 0.69314718055994531

/* Prior z ~ N(0, S0^2 I) in D dimensions; "likelihood" N(a; z, V) with V diagonal, times a
 * noise factor exp(sd eps - sd^2 / 2), eps standard normal, whose mean is 1. The evidence is
 * N(a; 0, S0^2 I + V) (the marginal of a linear-Gaussian model, Bishop 2006, Pattern
 * Recognition and Machine Learning, eq. 2.115). */
enum { D = 3 };
typedef struct {
    double s0;
    double a[D], v[D];
    double noise_sd;
    int cauchy_prior;  /* 1: a standard Cauchy prior per coordinate and a flat likelihood */
    int zero;          /* 1: every likelihood estimate is 0 */
} gauss_ctx;

static double g_log_prior(void *ctx, const double *z, double *theta)
{
    const gauss_ctx *c = ctx;
    double lp = 0;
    for (int i = 0; i < D; i++) {
        theta[i] = z[i];
        if (c->cauchy_prior)
            lp += -LN_PI - log1p(z[i] * z[i]);
        else
            lp += -0.5 * LN_2PI - log(c->s0) - 0.5 * z[i] * z[i] / (c->s0 * c->s0);
    }
    return lp;
}

/* The worker is the context itself (read-only); counting calls shows the work was done. */
typedef struct {
    const gauss_ctx *c;
    size_t n_calls;
} g_worker;

static size_t total_calls;

static void *g_worker_new(void *ctx)
{
    g_worker *w = calloc(1, sizeof *w);
    if (w)
        w->c = ctx;
    return w;
}

static void g_worker_free(void *worker)
{
    g_worker *w = worker;
    __atomic_add_fetch(&total_calls, w->n_calls, __ATOMIC_RELAXED);
    free(w);
}

static double g_log_lik(void *worker, const double *theta, tf_rng *rng)
{
    g_worker *w = worker;
    const gauss_ctx *c = w->c;
    w->n_calls++;
    if (c->zero)
        return -INFINITY;
    if (c->cauchy_prior)
        return 0.0;
    double ll = 0;
    for (int i = 0; i < D; i++)
        ll += -0.5 * LN_2PI - 0.5 * log(c->v[i]) - 0.5 * (c->a[i] - theta[i]) * (c->a[i] - theta[i]) / c->v[i];
    return ll + c->noise_sd * tf_rng_normal(rng) - 0.5 * c->noise_sd * c->noise_sd;
}

static double exact_log_evidence(const gauss_ctx *c)
{
    double l = 0;
    for (int i = 0; i < D; i++) {
        double var = c->s0 * c->s0 + c->v[i];
        l += -0.5 * LN_2PI - 0.5 * log(var) - 0.5 * c->a[i] * c->a[i] / var;
    }
    return l;
}

/* n draws of the exact posterior N(m, P^-1), P = I / S0^2 + V^-1, m = P^-1 V^-1 a, with the sd
 * multiplied by widen and the centre moved by shift posterior sds (to imitate a poor fit). */
static void posterior_draws(const gauss_ctx *c, size_t n, double widen, double shift, uint64_t seed, double *z)
{
    tf_rng rng;
    uint64_t key = 77;
    tf_rng_derive(&rng, seed, &key, 1);
    for (int i = 0; i < D; i++) {
        double prec = 1.0 / (c->s0 * c->s0) + 1.0 / c->v[i], sd = sqrt(1.0 / prec);
        double m = c->a[i] / c->v[i] / prec;
        for (size_t k = 0; k < n; k++)
            z[k * D + i] = m + shift * sd + widen * sd * tf_rng_normal(&rng);
    }
}

static gauss_ctx standard_ctx(void)
{
    gauss_ctx c = {2.0, {0.8, -1.5, 0.3}, {0.05, 0.2, 0.6}, 1.0, 0, 0};
    return c;
}

static tf_evidence_target target_of(gauss_ctx *c)
{
    tf_evidence_target t = {D, c, g_log_prior, g_worker_new, g_worker_free, g_log_lik, NULL};
    return t;
}

/* Repeats with different seeds against the exact value: each z-score (estimate - exact) / se
 * should be about standard normal, with the draws sized by need (the default: until se <= 0.05),
 * so that a stopping rule biased towards lucky standard errors would show here, so their sum of squares over R = 8 seeds stays below the
 * 99.9 % point of chi-square(8) (gsl_cdf_chisq_Qinv), and every single one within 4. Both the
 * adapted and the check density, with noisy likelihood estimates (sd 1 on the log scale), from
 * draws that are too wide and off-centre, and from draws that are too narrow. */
START_TEST(estimates_agree_with_exact_evidence)
{
    gauss_ctx c = standard_ctx();
    tf_evidence_target t = target_of(&c);
    const double exact = exact_log_evidence(&c);
    enum { NZ = 2000, R = 8 };
    static double z[NZ * D];
    static const struct {
        double widen, shift;
    } fits[] = {{1.0, 0.0}, {1.6, 0.8}, {0.6, -0.5}};
    for (size_t f = 0; f < 3; f++) {
        double chi_main = 0, chi_check = 0;
        for (int r = 0; r < R; r++) {
            posterior_draws(&c, NZ, fits[f].widen, fits[f].shift, 100 + (uint64_t)r, z);
            tf_evidence_options o = tf_evidence_default_options();
            o.seed = 1000 + (uint64_t)r;
            uint64_t keys[1] = {5};
            tf_evidence e;
            tf_error err;
            tf_error_init(&err);
            ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 1, NULL, &e, &err), TF_OK);
            double zm = (e.main.log_ml - exact) / e.main.se, zc = (e.check.log_ml - exact) / e.check.se;
            ck_assert_msg(fabs(zm) < 4 && fabs(zc) < 4, "fit %zu seed %d: main %g (se %g), check %g (se %g), exact %g",
                          f, r, e.main.log_ml, e.main.se, e.check.log_ml, e.check.se, exact);
            chi_main += zm * zm;
            chi_check += zc * zc;
            ck_assert(e.main.se > 0 && e.main.se < 0.2);
            ck_assert(e.main.pareto_k < TF_PARETO_K_MAX && e.reliable);
            ck_assert(e.main.ess > 100 && e.main.ess <= (double)e.main.n_draws);
            ck_assert(e.main.n_draws >= o.min_draws && e.main.n_draws <= o.n_draws);
            ck_assert(e.main.se <= o.target_se || e.main.n_draws == o.n_draws);
            ck_assert(e.check.se <= o.target_se || e.check.n_draws == o.n_draws);
            ck_assert_uint_eq(e.main.n_zero, 0);
            ck_assert_uint_ge(e.n_adapt_used, 1);
        }
        double limit = gsl_cdf_chisq_Qinv(1e-3, R);
        ck_assert_msg(chi_main < limit && chi_check < limit, "fit %zu: chi-square %g and %g over %d seeds (limit %g)", f,
                      chi_main, chi_check, R, limit);
    }
}
END_TEST

/* The same seed gives the same bits whatever the thread count, and the work done is every
 * adaptation draw plus both final samples. */
START_TEST(thread_count_does_not_change_results)
{
    gauss_ctx c = standard_ctx();
    tf_evidence_target t = target_of(&c);
    enum { NZ = 500 };
    static double z[NZ * D];
    posterior_draws(&c, NZ, 1.0, 0.0, 3, z);
    tf_evidence_options o = tf_evidence_default_options();
    o.n_draws = 1000;
    o.n_adapt_draws = 300;
    o.target_se = 0;   /* fixed: exactly n_draws per density */
    tf_evidence e1, e2;
    uint64_t keys[2] = {1, 2};
    total_calls = 0;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 2, NULL, &e1, NULL), TF_OK);
    ck_assert_uint_eq(total_calls, o.n_adapt_rounds * o.n_adapt_draws + 2 * o.n_draws);
    ck_assert_uint_eq(e1.main.n_draws, o.n_draws);
    /* By need, with a target that takes more than the first blocks: the same on 3 threads. */
    o.target_se = 0.012;
    o.n_draws = 4000;
    total_calls = 0;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 2, NULL, &e1, NULL), TF_OK);
    ck_assert_uint_eq(total_calls, o.n_adapt_rounds * o.n_adapt_draws + e1.main.n_draws + e1.check.n_draws);
    ck_assert_uint_gt(e1.main.n_draws, o.min_draws);
    ck_assert(e1.main.n_draws == o.n_draws || e1.main.n_draws % 32 == 0);
    o.n_threads = 3;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 2, NULL, &e2, NULL), TF_OK);
    ck_assert(memcmp(&e1, &e2, sizeof e1) == 0);
    o.target_se = 0;
    o.n_draws = 1000;
    o.n_threads = 1;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 2, NULL, &e1, NULL), TF_OK);
    o.n_threads = 3;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 2, NULL, &e2, NULL), TF_OK);
    ck_assert(memcmp(&e1, &e2, sizeof e1) == 0);
    /* Another key (another model or population) gives other random numbers. */
    keys[1] = 3;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 2, NULL, &e2, NULL), TF_OK);
    ck_assert(e1.main.log_ml != e2.main.log_ml);
    ck_assert(fabs(e1.z_diff) <= TF_EVIDENCE_Z_MAX && e1.agree);
}
END_TEST

/* Draws by need: a loose target stops at the minimum, a tight one at the cap, and one between
 * stops at the first size whose standard error meets it, in whole blocks of 32. */
START_TEST(draws_are_sized_by_the_standard_error)
{
    gauss_ctx c = standard_ctx();
    tf_evidence_target t = target_of(&c);
    enum { NZ = 1000 };
    static double z[NZ * D];
    posterior_draws(&c, NZ, 1.0, 0.0, 8, z);
    tf_evidence_options o = tf_evidence_default_options();
    uint64_t keys[1] = {4};
    tf_evidence e;
    o.target_se = 1.0;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 1, NULL, &e, NULL), TF_OK);
    ck_assert_uint_eq(e.main.n_draws, o.min_draws);
    ck_assert_uint_eq(e.check.n_draws, o.min_draws);
    o.target_se = 1e-4;
    o.n_draws = 700;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 1, NULL, &e, NULL), TF_OK);
    ck_assert_uint_eq(e.main.n_draws, 700);
    ck_assert(e.main.se > o.target_se);
    o = tf_evidence_default_options();
    o.target_se = 0.04;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 1, NULL, &e, NULL), TF_OK);
    ck_assert_msg(e.main.n_draws > o.min_draws && e.main.n_draws < o.n_draws, "%zu draws, se %g", e.main.n_draws, e.main.se);
    ck_assert_uint_eq(e.main.n_draws % 32, 0);
    ck_assert_msg(e.main.se <= o.target_se, "se %g after %zu draws", e.main.se, e.main.n_draws);
}
END_TEST

/* Weights with an infinite-variance tail are flagged: a Cauchy prior (flat likelihood, so the
 * evidence is exactly 1) sampled with a near-normal density (nu = 50) fitted to draws of sd 0.3:
 * per coordinate the weight grows like exp(u^2 / 2) / (1 + 0.09 u^2), u = z / 0.3, whose tail
 * P(w > x) falls like 1 / x up to logarithms: Pareto k near 1, far above 0.7. */
START_TEST(heavy_tailed_weights_are_flagged)
{
    gauss_ctx c = standard_ctx();
    c.cauchy_prior = 1;
    tf_evidence_target t = target_of(&c);
    enum { NZ = 1000 };
    static double z[NZ * D];
    tf_rng rng;
    uint64_t key = 9;
    tf_rng_derive(&rng, 4, &key, 1);
    for (size_t k = 0; k < NZ * D; k++)
        z[k] = 0.3 * tf_rng_normal(&rng);
    tf_evidence_options o = tf_evidence_default_options();
    o.n_adapt_rounds = 0;
    o.nu = o.check_nu = 50;
    o.defensive_weight = 0;
    o.n_draws = 5000;
    o.target_se = 0;   /* a fixed sample: the flag, not the stopping, is checked here */
    tf_evidence e;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, &key, 1, NULL, &e, NULL), TF_OK);
    ck_assert_msg(e.main.pareto_k > TF_PARETO_K_MAX, "k %g", e.main.pareto_k);
    ck_assert(!e.reliable);
}
END_TEST

/* The prior of the reweighting tests: z_i ~ N(0, (scale_i s0)^2) against the fitted N(0, s0^2). */
typedef struct {
    double s0;
    double scale[D];
} rescale_ctx;

static double rescaled_log_ratio(void *ctx, const double *theta)
{
    const rescale_ctx *r = ctx;
    double l = 0;
    for (int i = 0; i < D; i++) {
        double s1 = r->scale[i] * r->s0;
        l += -log(s1) - 0.5 * theta[i] * theta[i] / (s1 * s1) + log(r->s0) + 0.5 * theta[i] * theta[i] / (r->s0 * r->s0);
    }
    return l;
}

static double zero_log_ratio(void *ctx, const double *theta)
{
    (void)ctx;
    (void)theta;
    return 0.0;
}

static double uncovered_log_ratio(void *ctx, const double *theta)
{
    (void)ctx;
    return theta[0] > 0 ? INFINITY : 0.0;
}

/* The draws of one run under another prior against the closed form under that prior: the
 * evidence N(a; 0, (2 S0)^2 I + V) when every prior sd is doubled (Bishop 2006, eq. 2.115), and
 * N(a; 0, (S0/2)^2 I + V) halved. As for the run itself: each z-score within 4 and their sum of
 * squares over R = 8 seeds below the 99.9 % point of chi-square(8). The same draws under the same
 * prior give the run's own estimate bit for bit. */
START_TEST(reweighted_estimates_agree_with_exact_evidence)
{
    gauss_ctx c = standard_ctx();
    tf_evidence_target t = target_of(&c);
    tf_evidence_draws *kd = tf_evidence_draws_new();
    ck_assert_ptr_nonnull(kd);
    t.keep = kd;
    enum { NZ = 2000, R = 8 };
    static double z[NZ * D];
    static const double factors[] = {2.0, 0.5};
    for (size_t f = 0; f < 2; f++) {
        gauss_ctx alt = c;
        alt.s0 = c.s0 * factors[f];
        const double exact = exact_log_evidence(&alt);
        rescale_ctx rc = {c.s0, {factors[f], factors[f], factors[f]}};
        double chi = 0;
        for (int r = 0; r < R; r++) {
            posterior_draws(&c, NZ, 1.0, 0.0, 300 + (uint64_t)r, z);
            tf_evidence_options o = tf_evidence_default_options();
            o.seed = 3000 + (uint64_t)r;
            uint64_t keys[1] = {6};
            tf_evidence e;
            ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 1, NULL, &e, NULL), TF_OK);
            ck_assert_uint_eq(tf_evidence_draws_n(kd), e.main.n_draws);
            ck_assert_uint_eq(tf_evidence_draws_dim(kd), D);
            tf_evidence_estimate same, w;
            size_t unc = 99;
            ck_assert_int_eq(tf_evidence_reweight(kd, zero_log_ratio, NULL, &same, &unc, NULL), TF_OK);
            ck_assert(same.log_ml == e.main.log_ml && same.se == e.main.se && unc == 0);
            ck_assert_int_eq(tf_evidence_reweight(kd, rescaled_log_ratio, &rc, &w, &unc, NULL), TF_OK);
            double zs = (w.log_ml - exact) / w.se;
            ck_assert_msg(fabs(zs) < 4, "factor %g seed %d: %g (se %g, k %g), exact %g", factors[f], r, w.log_ml, w.se,
                          w.pareto_k, exact);
            chi += zs * zs;
        }
        double limit = gsl_cdf_chisq_Qinv(1e-3, R);
        ck_assert_msg(chi < limit, "factor %g: chi-square %g over %d seeds (limit %g)", factors[f], chi, R, limit);
    }
    tf_evidence_draws_free(kd);
}
END_TEST

/* Lindley (1957, Biometrika 44:187) and Kass & Raftery (1995, JASA 90:773, section 5): when the
 * data dominate, doubling the prior sd of one parameter halves the prior density where the
 * likelihood lives, so log p(y) falls by ln 2. Here S0 = 20 against likelihood sds of at most
 * 0.8: the closed form gives a fall of ln 2 - 0.5 ln((4 S0^2 + v) / (S0^2 + v) / 4) - ..., which
 * differs from ln 2 by under 0.001 (computed below, not assumed). Tolerance: that gap plus 4
 * standard errors of the two estimates (summed, since they come from the same draws and are
 * positively correlated: the sum bounds the se of the difference). */
START_TEST(doubling_one_prior_scale_lowers_log_evidence_by_ln2)
{
    gauss_ctx c = standard_ctx();
    c.s0 = 20.0;
    tf_evidence_target t = target_of(&c);
    tf_evidence_draws *kd = tf_evidence_draws_new();
    ck_assert_ptr_nonnull(kd);
    t.keep = kd;
    enum { NZ = 2000 };
    static double z[NZ * D];
    posterior_draws(&c, NZ, 1.0, 0.0, 41, z);
    tf_evidence_options o = tf_evidence_default_options();
    uint64_t keys[1] = {7};
    tf_evidence e;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 1, NULL, &e, NULL), TF_OK);
    rescale_ctx rc = {c.s0, {2.0, 1.0, 1.0}};
    tf_evidence_estimate w;
    ck_assert_int_eq(tf_evidence_reweight(kd, rescaled_log_ratio, &rc, &w, NULL, NULL), TF_OK);
    double v = c.v[0], a = c.a[0], s2 = c.s0 * c.s0;
    double exact_drop = 0.5 * log((4 * s2 + v) / (s2 + v)) + 0.5 * a * a * (1 / (4 * s2 + v) - 1 / (s2 + v));
    ck_assert_msg(fabs(exact_drop - LN_2) < 1e-3, "closed-form drop %g", exact_drop);
    double drop = e.main.log_ml - w.log_ml, tol = fabs(exact_drop - LN_2) + 4 * (e.main.se + w.se);
    ck_assert_msg(fabs(drop - LN_2) < tol, "drop %g, ln 2 %g, tolerance %g", drop, LN_2, tol);
    ck_assert(w.pareto_k < TF_PARETO_K_MAX);
    tf_evidence_draws_free(kd);
}
END_TEST

/* Draws outside the old prior's support carry no likelihood, so a prior that gives them mass
 * is reported as not covered; nothing kept is refused. */
START_TEST(reweighting_reports_what_it_cannot_see)
{
    gauss_ctx c = standard_ctx();
    tf_evidence_target t = target_of(&c);
    tf_evidence_draws *kd = tf_evidence_draws_new();
    tf_evidence_estimate w;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_evidence_reweight(kd, zero_log_ratio, NULL, &w, NULL, &err), TF_ERR_INVALID);
    t.keep = kd;
    enum { NZ = 500 };
    static double z[NZ * D];
    posterior_draws(&c, NZ, 1.0, 0.0, 12, z);
    tf_evidence_options o = tf_evidence_default_options();
    uint64_t keys[1] = {8};
    tf_evidence e;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, keys, 1, NULL, &e, NULL), TF_OK);
    size_t unc = 0;
    ck_assert_int_eq(tf_evidence_reweight(kd, uncovered_log_ratio, NULL, &w, &unc, NULL), TF_OK);
    ck_assert_uint_gt(unc, 0);
    ck_assert_uint_lt(unc, tf_evidence_draws_n(kd));
    tf_evidence_draws_free(kd);
}
END_TEST

START_TEST(errors_are_reported)
{
    gauss_ctx c = standard_ctx();
    tf_evidence_target t = target_of(&c);
    enum { NZ = 200 };
    static double z[NZ * D];
    posterior_draws(&c, NZ, 1.0, 0.0, 5, z);
    tf_evidence_options o = tf_evidence_default_options();
    tf_evidence e;
    tf_error err;
    uint64_t key = 1;
    /* Too few draws for a covariance. */
    tf_error_init(&err);
    ck_assert_int_eq(tf_evidence_run(&t, z, 2 * D + 1, &o, &key, 1, NULL, &e, &err), TF_ERR_INVALID);
    /* Bad options. */
    o.n_draws = 10;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, &key, 1, NULL, &e, &err), TF_ERR_INVALID);
    o = tf_evidence_default_options();
    o.defensive_weight = 1.0;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, &key, 1, NULL, &e, &err), TF_ERR_INVALID);
    o = tf_evidence_default_options();
    o.n_threads = 0;
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, &key, 1, NULL, &e, &err), TF_ERR_INVALID);
    /* Draws that are all equal in one coordinate. */
    o = tf_evidence_default_options();
    static double flat[NZ * D];
    memcpy(flat, z, sizeof flat);
    for (size_t k = 0; k < NZ; k++)
        flat[k * D + 1] = 0.5;
    tf_error_init(&err);
    ck_assert_int_eq(tf_evidence_run(&t, flat, NZ, &o, &key, 1, NULL, &e, &err), TF_ERR_NUMERIC);
    /* Every estimate zero. */
    c.zero = 1;
    tf_error_init(&err);
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, &key, 1, NULL, &e, &err), TF_ERR_NUMERIC);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "zero"));
    c.zero = 0;
    /* Interrupted. */
    volatile sig_atomic_t stop = 1;
    tf_error_init(&err);
    ck_assert_int_eq(tf_evidence_run(&t, z, NZ, &o, &key, 1, &stop, &e, &err), TF_ERR_INTERRUPTED);
}
END_TEST

static Suite *make_suite(void)
{
    gsl_set_error_handler_off(); /* as main does; inherited by the forked tests */
    Suite *s = suite_create("evidence");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, estimates_agree_with_exact_evidence);
    tcase_add_test(tc, thread_count_does_not_change_results);
    tcase_add_test(tc, heavy_tailed_weights_are_flagged);
    tcase_add_test(tc, draws_are_sized_by_the_standard_error);
    tcase_add_test(tc, errors_are_reported);
    tcase_add_test(tc, reweighted_estimates_agree_with_exact_evidence);
    tcase_add_test(tc, doubling_one_prior_scale_lowers_log_evidence_by_ln2);
    tcase_add_test(tc, reweighting_reports_what_it_cannot_see);
    suite_add_tcase(s, tc);
    return s;
}
