/* Unit tests of the prior families, truncation, draws and the prior set. */
#include "tf_test.h"

#include <math.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>

#include "model/prior.h"

/* Reference values below come from scipy 1.10.1 (scipy.stats.norm, truncnorm, lognorm, halfnorm,
 * gamma, t: logpdf, cdf, ppf; truncation as pdf / (cdf(hi) - cdf(lo)) or through sf in the
 * upper tail), printed with repr. Tolerance: both sides are double-precision evaluations of
 * the same closed forms; 1e-9 relative allows for the different special-function codes (GSL's
 * and Cephes') in the far tails. */
#define REF_TOL 1e-9

static void check_close(double got, double want, const char *what)
{
    double tol = REF_TOL * fmax(1.0, fabs(want));
    ck_assert_msg(fabs(got - want) <= tol, "%s: got %.17g, want %.17g", what, got, want);
}

static tf_prior make(tf_prior_kind kind, double a, double b, double c, double lo, double hi)
{
    double par[3] = {a, b, c};
    tf_prior p;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_prior_init(&p, kind, par, lo, hi, &err), TF_OK);
    return p;
}

START_TEST(known_values_match_scipy)
{
    tf_prior p = make(TF_PRIOR_NORMAL, 1, 2, 0, -INFINITY, INFINITY);
    check_close(tf_prior_log_density(&p, 0.3), -1.6733357137646179, "normal logpdf");
    check_close(tf_prior_cdf(&p, 0.3), 0.3631693488243809, "normal cdf");
    check_close(tf_prior_quantile(&p, 0.9), 3.5631031310892007, "normal ppf");

    p = make(TF_PRIOR_NORMAL, 1, 2, 0, 0, INFINITY);
    check_close(tf_prior_log_density(&p, 0.3), -1.3043892984759617, "truncnorm logpdf");
    check_close(tf_prior_cdf(&p, 0.3), 0.07900907591966069, "truncnorm cdf");
    check_close(tf_prior_quantile(&p, 0.9), 3.9643593568818134, "truncnorm ppf");

    p = make(TF_PRIOR_LOGNORMAL, 6.2, 1.5, 0, 1, INFINITY);
    check_close(tf_prior_log_density(&p, 500), -7.539041284048757, "lognormal logpdf");
    check_close(tf_prior_cdf(&p, 500), 0.5038762614576376, "lognormal cdf");
    check_close(tf_prior_quantile(&p, 0.9), 3368.903596181421, "lognormal ppf");

    p = make(TF_PRIOR_HALFNORMAL, 0.5, 0, 0, -INFINITY, INFINITY);
    check_close(tf_prior_log_density(&p, 0.7), -0.512644172084782, "halfnormal logpdf");
    p = make(TF_PRIOR_HALFNORMAL, 0.5, 0, 0, 0, 1);
    check_close(tf_prior_log_density(&p, 0.7), -0.4660762597923918, "truncated halfnormal logpdf");
    check_close(tf_prior_cdf(&p, 0.7), 0.8784566928800212, "truncated halfnormal cdf");
    check_close(tf_prior_quantile(&p, 0.3), 0.1834791794736665, "truncated halfnormal ppf");

    p = make(TF_PRIOR_GAMMA, 2, 5, 0, -INFINITY, INFINITY);
    check_close(tf_prior_log_density(&p, 0.3), 0.5149030205422647, "gamma logpdf");
    p = make(TF_PRIOR_GAMMA, 2, 5, 0, 0.1, 2);
    check_close(tf_prior_log_density(&p, 0.3), 0.6099869765614006, "truncated gamma logpdf");
    check_close(tf_prior_cdf(&p, 0.3), 0.3870800714931342, "truncated gamma cdf");
    check_close(tf_prior_quantile(&p, 0.6), 0.4321681192108039, "truncated gamma ppf");

    p = make(TF_PRIOR_STUDENT_T, 0, 2.5, 3, -INFINITY, INFINITY);
    check_close(tf_prior_log_density(&p, 1.7), -2.2038789846213866, "t logpdf");
    check_close(tf_prior_cdf(&p, 1.7), 0.7273612251421868, "t cdf");
    check_close(tf_prior_quantile(&p, 0.975), 7.956115763210657, "t ppf");
    p = make(TF_PRIOR_STUDENT_T, 0, 2.5, 3, 0, INFINITY);
    check_close(tf_prior_log_density(&p, 1.7), -1.5107318040614413, "half-t logpdf");

    /* Uniform(-1, 3) cut to [0, 10] is uniform on [0, 3]: density 1/3 (no library needed). */
    p = make(TF_PRIOR_UNIFORM, -1, 3, 0, 0, 10);
    check_close(tf_prior_log_density(&p, 2), -log(3.0), "truncated uniform logpdf");
    check_close(tf_prior_cdf(&p, 1.5), 0.5, "truncated uniform cdf");
    ck_assert(tf_prior_log_density(&p, -0.5) == -INFINITY);
}
END_TEST

/* Truncation far out in a tail, where 1 - cdf would have lost every digit. */
START_TEST(far_tail_truncation_keeps_precision)
{
    tf_prior p = make(TF_PRIOR_NORMAL, 0, 1, 0, 10, 12);
    check_close(tf_prior_log_density(&p, 10.1), 1.3073466175409436, "upper-tail logpdf");
    check_close(tf_prior_cdf(&p, 10.1), 0.6375114504342683, "upper-tail cdf");
    check_close(tf_prior_quantile(&p, 0.5), 10.068411836058495, "upper-tail ppf");

    p = make(TF_PRIOR_NORMAL, 0, 1, 0, -INFINITY, -20);
    check_close(tf_prior_log_density(&p, -20.05), 1.996966837892586, "lower-tail logpdf");
    check_close(tf_prior_cdf(&p, -20.05), 0.366508128421876, "lower-tail cdf");
    check_close(tf_prior_quantile(&p, 0.5), -20.03454167651402, "lower-tail ppf");

    p = make(TF_PRIOR_LOGNORMAL, 0, 1, 0, 1e6, INFINITY);
    check_close(tf_prior_log_density(&p, 2e6), -21.694102221608716, "lognormal-tail logpdf");
    check_close(tf_prior_cdf(&p, 2e6), 0.999948032158692, "lognormal-tail cdf");
}
END_TEST

/* The normalisation: each density integrates to 1 over its support (GSL QAGS / QAGIU / QAGIL /
 * QAGI adaptive quadrature). Tolerance 1e-7: the requested relative error is 1e-9. */
typedef struct {
    const tf_prior *p;
} integrand_data;

static double density_at(double x, void *data)
{
    return exp(tf_prior_log_density(((integrand_data *)data)->p, x));
}

static double integrate_prior(const tf_prior *p)
{
    gsl_integration_workspace *ws = gsl_integration_workspace_alloc(1000);
    ck_assert_ptr_nonnull(ws);
    integrand_data d = {p};
    gsl_function f = {density_at, &d};
    double r = NAN, abserr;
    int st;
    if (isfinite(p->lower) && isfinite(p->upper))
        st = gsl_integration_qags(&f, p->lower, p->upper, 0, 1e-9, 1000, ws, &r, &abserr);
    else if (isfinite(p->lower))
        st = gsl_integration_qagiu(&f, p->lower, 0, 1e-9, 1000, ws, &r, &abserr);
    else if (isfinite(p->upper))
        st = gsl_integration_qagil(&f, p->upper, 0, 1e-9, 1000, ws, &r, &abserr);
    else
        st = gsl_integration_qagi(&f, 0, 1e-9, 1000, ws, &r, &abserr);
    gsl_integration_workspace_free(ws);
    ck_assert_msg(st == GSL_SUCCESS, "integration failed: %s", gsl_strerror(st));
    return r;
}

START_TEST(densities_integrate_to_one)
{
    const tf_prior cases[] = {
        make(TF_PRIOR_NORMAL, 0.5, 0.5, 0, 0, INFINITY),
        make(TF_PRIOR_NORMAL, 0, 1, 0, -1, 2.5),
        make(TF_PRIOR_LOGNORMAL, 6.2, 1.5, 0, 1, INFINITY),
        make(TF_PRIOR_LOGNORMAL, 0, 1, 0, -INFINITY, INFINITY),
        make(TF_PRIOR_HALFNORMAL, 0.5, 0, 0, -INFINITY, INFINITY),
        make(TF_PRIOR_HALFNORMAL, 2, 0, 0, 1, 3),
        make(TF_PRIOR_GAMMA, 2, 5, 0, -INFINITY, INFINITY),
        make(TF_PRIOR_GAMMA, 3, 0.5, 0, 1, INFINITY),
        make(TF_PRIOR_UNIFORM, -1, 3, 0, 0, 10),
        make(TF_PRIOR_STUDENT_T, 1, 2, 3, -INFINITY, INFINITY),
        make(TF_PRIOR_STUDENT_T, 0, 1, 1, 0, INFINITY),
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char d[160];
        tf_prior_describe(&cases[i], d, sizeof d);
        double r = integrate_prior(&cases[i]);
        ck_assert_msg(fabs(r - 1) < 1e-7, "%s integrates to %.12g", d, r);
    }
}
END_TEST

/* Draws against the prior's own distribution function: Kolmogorov-Smirnov distance of 20000
 * draws below 1.949 / sqrt(n), the asymptotic critical value at alpha = 0.001 (Kolmogorov
 * distribution; Smirnov 1948 table). The cdf itself is checked against scipy above. */
static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

START_TEST(draws_follow_the_distribution)
{
    enum { N = 20000 };
    const tf_prior cases[] = {
        make(TF_PRIOR_NORMAL, 0.5, 0.5, 0, 0, INFINITY),
        make(TF_PRIOR_NORMAL, 0, 1, 0, 10, 12),
        make(TF_PRIOR_LOGNORMAL, 6.2, 1.5, 0, 1, INFINITY),
        make(TF_PRIOR_HALFNORMAL, 0.5, 0, 0, -INFINITY, 0.4),
        make(TF_PRIOR_GAMMA, 0.7, 2, 0, -INFINITY, INFINITY),
        make(TF_PRIOR_GAMMA, 2, 5, 0, 0.1, 2),
        make(TF_PRIOR_UNIFORM, -1, 3, 0, 0, 10),
        make(TF_PRIOR_STUDENT_T, 0, 2.5, 3, -INFINITY, INFINITY),
    };
    double *x = malloc(N * sizeof *x);
    ck_assert_ptr_nonnull(x);
    tf_rng rng;
    uint64_t key = 11;
    tf_rng_derive(&rng, 2026, &key, 1);
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        for (int i = 0; i < N; i++) {
            x[i] = tf_prior_draw(&cases[c], &rng);
            ck_assert(x[i] >= cases[c].lower && x[i] <= cases[c].upper);
        }
        qsort(x, N, sizeof *x, cmp_double);
        double dmax = 0;
        for (int i = 0; i < N; i++) {
            double F = tf_prior_cdf(&cases[c], x[i]);
            dmax = fmax(dmax, fmax(F - (double)i / N, (double)(i + 1) / N - F));
        }
        char d[160];
        tf_prior_describe(&cases[c], d, sizeof d);
        ck_assert_msg(dmax < 1.949 / sqrt((double)N), "%s: KS distance %g", d, dmax);
    }
    free(x);
}
END_TEST

START_TEST(quantile_inverts_cdf)
{
    const tf_prior cases[] = {
        make(TF_PRIOR_NORMAL, 0, 1, 0, 10, 12),
        make(TF_PRIOR_LOGNORMAL, 0, 1, 0, 1e6, INFINITY),
        make(TF_PRIOR_HALFNORMAL, 0.5, 0, 0, -INFINITY, INFINITY),
        make(TF_PRIOR_GAMMA, 0.5, 1, 0, 0, 1e-3),
        make(TF_PRIOR_STUDENT_T, 0, 1, 2, -5, -4),
    };
    const double probs[] = {1e-6, 0.01, 0.3, 0.5, 0.77, 0.999};
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++)
        for (size_t k = 0; k < sizeof probs / sizeof probs[0]; k++) {
            double q = tf_prior_quantile(&cases[c], probs[k]);
            /* Inversion through the precise tail: the round trip keeps ~1e-8 relative. */
            ck_assert_msg(fabs(tf_prior_cdf(&cases[c], q) - probs[k]) < 1e-8 * fmax(probs[k], 1e-3),
                          "case %zu prob %g: cdf(quantile) = %.12g", c, probs[k], tf_prior_cdf(&cases[c], q));
        }
    tf_prior p = make(TF_PRIOR_NORMAL, 0, 1, 0, -1, 1);
    ck_assert_double_eq(tf_prior_quantile(&p, 0), -1);
    ck_assert_double_eq(tf_prior_quantile(&p, 1), 1);
    ck_assert(isnan(tf_prior_quantile(&p, 1.5)));
    ck_assert(isnan(tf_prior_cdf(&p, NAN)));
    ck_assert(tf_prior_log_density(&p, NAN) == -INFINITY);
}
END_TEST

START_TEST(supports_and_descriptions)
{
    char buf[160];
    tf_prior p = make(TF_PRIOR_LOGNORMAL, 6.2, 1.5, 0, 1, INFINITY);
    ck_assert_double_eq(p.lower, 1);
    ck_assert(p.upper == INFINITY);
    ck_assert_uint_eq(tf_prior_describe(&p, buf, sizeof buf), strlen(buf));
    ck_assert_str_eq(buf, "lognormal(meanlog=6.2, sdlog=1.5) truncated to [1, inf)");

    p = make(TF_PRIOR_LOGNORMAL, 0, 1, 0, 0, INFINITY); /* the cut changes nothing */
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "lognormal(meanlog=0, sdlog=1)");
    ck_assert_double_eq(p.lower, 0);
    ck_assert(tf_prior_log_density(&p, 0) == -INFINITY);

    p = make(TF_PRIOR_NORMAL, 0.5, 0.5, 0, 0, INFINITY);
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "normal(mean=0.5, sd=0.5) truncated to [0, inf)");

    p = make(TF_PRIOR_STUDENT_T, 0, 2.5, 3, -INFINITY, 4);
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "student_t(location=0, scale=2.5, df=3) truncated to (-inf, 4]");

    p = make(TF_PRIOR_HALFNORMAL, 1, 0, 0, -5, 2);
    ck_assert_double_eq(p.lower, 0);
    ck_assert_double_eq(p.upper, 2);
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "halfnormal(sd=1) truncated to [-5, 2]");
    ck_assert(isfinite(tf_prior_log_density(&p, 0)));

    /* A short buffer is cut but terminated; the return value is the full length. */
    char small[8];
    size_t need = tf_prior_describe(&p, small, sizeof small);
    ck_assert_uint_eq(need, strlen(buf));
    ck_assert_str_eq(small, "halfnor");
}
END_TEST

START_TEST(names_and_parameter_rules)
{
    for (int k = 0; k < TF_PRIOR_N_KINDS; k++) {
        const char *name = tf_prior_kind_name((tf_prior_kind)k);
        ck_assert_ptr_nonnull(name);
        ck_assert_int_eq(tf_prior_kind_from_name(name), k);
        ck_assert_uint_gt(tf_prior_n_par((tf_prior_kind)k), 0);
        ck_assert_ptr_null(tf_prior_par_name((tf_prior_kind)k, tf_prior_n_par((tf_prior_kind)k)));
    }
    ck_assert_int_eq(tf_prior_kind_from_name("lognorm"), -1);
    ck_assert_ptr_null(tf_prior_kind_name(TF_PRIOR_N_KINDS));
    ck_assert_str_eq(tf_prior_par_name(TF_PRIOR_GAMMA, 1), "rate");
    ck_assert_ptr_null(tf_prior_par_check(TF_PRIOR_NORMAL, 0, -3));
    ck_assert_ptr_nonnull(tf_prior_par_check(TF_PRIOR_NORMAL, 1, 0));
    ck_assert_ptr_nonnull(tf_prior_par_check(TF_PRIOR_NORMAL, 0, INFINITY));
    ck_assert_ptr_nonnull(tf_prior_par_check(TF_PRIOR_STUDENT_T, 2, -1));
    ck_assert_ptr_nonnull(tf_prior_par_check(TF_PRIOR_UNIFORM, 0, NAN));
    ck_assert_ptr_nonnull(tf_prior_par_check(TF_PRIOR_HALFNORMAL, 1, 1));
}
END_TEST

START_TEST(bad_priors_are_refused)
{
    struct {
        tf_prior_kind kind;
        double par[3], lo, hi;
        tf_status status;
        const char *text;
    } cases[] = {
        {TF_PRIOR_NORMAL, {0, -1, 0}, -INFINITY, INFINITY, TF_ERR_INVALID, "sd must be a positive"},
        {TF_PRIOR_LOGNORMAL, {NAN, 1, 0}, -INFINITY, INFINITY, TF_ERR_INVALID, "meanlog must be a finite"},
        {TF_PRIOR_GAMMA, {2, 0, 0}, -INFINITY, INFINITY, TF_ERR_INVALID, "rate must be"},
        {TF_PRIOR_UNIFORM, {3, 1, 0}, -INFINITY, INFINITY, TF_ERR_INVALID, "min (3) must be below max (1)"},
        {TF_PRIOR_NORMAL, {0, 1, 0}, 2, 1, TF_ERR_INVALID, "must be below the upper"},
        {TF_PRIOR_NORMAL, {0, 1, 0}, NAN, 1, TF_ERR_INVALID, "must be below the upper"},
        {TF_PRIOR_HALFNORMAL, {1, 0, 0}, -INFINITY, -1, TF_ERR_INVALID, "leaves nothing of its support"},
        {TF_PRIOR_UNIFORM, {0, 1, 0}, 2, 3, TF_ERR_INVALID, "leaves nothing of its support"},
        /* Phi(-40) ~ 1e-350 is below the smallest double: nothing representable is left. */
        {TF_PRIOR_NORMAL, {0, 1, 0}, 40, 50, TF_ERR_RANGE, "keeps no representable probability"},
        {TF_PRIOR_N_KINDS, {0, 1, 0}, -INFINITY, INFINITY, TF_ERR_INVALID, "unknown prior distribution"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tf_error err;
        tf_error_init(&err);
        tf_prior p;
        ck_assert_int_eq(tf_prior_init(&p, cases[i].kind, cases[i].par, cases[i].lo, cases[i].hi, &err),
                         cases[i].status);
        ck_assert_uint_eq(err.n_items, 1);
        ck_assert_msg(strstr(err.items[0].what, cases[i].text), "case %zu: '%s'", i, err.items[0].what);
    }
}
END_TEST

static const char *const set_names[] = {"r", "K", "sigma", "tau"};
static const double set_lower[] = {-INFINITY, 0, 0, 0};
static const double set_upper[] = {INFINITY, INFINITY, INFINITY, INFINITY};

START_TEST(prior_set_sums_and_checks)
{
    tf_error err;
    tf_error_init(&err);
    tf_prior_set *s;
    ck_assert_int_eq(tf_prior_set_new(4, set_names, set_lower, set_upper, &s, &err), TF_OK);
    ck_assert_uint_eq(tf_prior_set_n_params(s), 4);
    ck_assert_str_eq(tf_prior_set_name(s, 2), "sigma");
    ck_assert_int_eq(tf_prior_set_index(s, "tau"), 3);
    ck_assert_int_eq(tf_prior_set_index(s, "phi"), -1);

    tf_prior pr = make(TF_PRIOR_NORMAL, 0, 0.5, 0, -INFINITY, INFINITY);
    tf_prior pk = make(TF_PRIOR_LOGNORMAL, 6, 1.5, 0, -INFINITY, INFINITY);
    tf_prior ps = make(TF_PRIOR_HALFNORMAL, 0.5, 0, 0, -INFINITY, INFINITY);
    ck_assert_int_eq(tf_prior_set_assign(s, "r", &pr, &err), TF_OK);
    ck_assert_int_eq(tf_prior_set_assign(s, "K", &pk, &err), TF_OK);
    ck_assert_int_eq(tf_prior_set_assign(s, "sigma", &ps, &err), TF_OK);
    ck_assert_uint_eq(err.n_items, 0);

    /* Incomplete: one message naming tau; the log density is NaN until it is complete. */
    ck_assert_int_eq(tf_prior_set_check_complete(s, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(err.n_items, 1);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "'tau'"));
    double theta[4] = {0.1, 300, 0.2, 0.3};
    ck_assert(isnan(tf_prior_set_log_density(s, theta)));
    ck_assert_ptr_null(tf_prior_set_prior(s, 3));

    ck_assert_int_eq(tf_prior_set_assign(s, "tau", &ps, &err), TF_OK);
    tf_error_init(&err);
    ck_assert_int_eq(tf_prior_set_check_complete(s, &err), TF_OK);
    double want = tf_prior_log_density(&pr, 0.1) + tf_prior_log_density(&pk, 300) +
                  tf_prior_log_density(&ps, 0.2) + tf_prior_log_density(&ps, 0.3);
    ck_assert_double_eq_tol(tf_prior_set_log_density(s, theta), want, 1e-12);
    theta[2] = -0.1;
    ck_assert(tf_prior_set_log_density(s, theta) == -INFINITY);

    tf_rng rng;
    uint64_t key = 3;
    tf_rng_derive(&rng, 1, &key, 1);
    for (int i = 0; i < 100; i++) {
        tf_prior_set_draw(s, &rng, theta);
        ck_assert(isfinite(tf_prior_set_log_density(s, theta)));
    }

    /* A prior reaching outside the model's support, and an unknown name, are refused. */
    tf_prior bad = make(TF_PRIOR_NORMAL, 0.3, 0.2, 0, -INFINITY, INFINITY);
    ck_assert_int_eq(tf_prior_set_assign(s, "sigma", &bad, &err), TF_ERR_INVALID);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "sigma"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "lower = 0"));
    ck_assert_int_eq(tf_prior_set_prior(s, 2)->kind, TF_PRIOR_HALFNORMAL); /* unchanged */
    ck_assert_int_eq(tf_prior_set_assign(s, "theta", &bad, &err), TF_ERR_INVALID);
    ck_assert_ptr_nonnull(strstr(err.items[1].what, "'theta'"));
    ck_assert_ptr_nonnull(strstr(err.items[1].hint, "r, K, sigma, tau"));
    tf_prior_set_free(s);
    tf_prior_set_free(NULL);
}
END_TEST

/* A rescaled prior is the law of c + f (X - c) for the family's centre c (the mean, location or
 * midpoint; 0 for the half-normal and gamma; on the log scale, the median, for the log-normal):
 * a scale family's definition (common practice, no source), checked through the quantiles at
 * several levels, to 1e-9 relative. Truncation bounds stay; bad factors are refused. */
START_TEST(rescaled_priors_stretch_about_their_centre)
{
    static const struct {
        tf_prior_kind kind;
        double par[3], centre;
        int log_scale;
    } cases[] = {
        {TF_PRIOR_NORMAL, {0.3, 0.5, 0}, 0.3, 0},   {TF_PRIOR_LOGNORMAL, {2.3, 1.5, 0}, 2.3, 1},
        {TF_PRIOR_HALFNORMAL, {0.5, 0, 0}, 0.0, 0}, {TF_PRIOR_GAMMA, {2.0, 3.0, 0}, 0.0, 0},
        {TF_PRIOR_UNIFORM, {1.0, 4.0, 0}, 2.5, 0},  {TF_PRIOR_STUDENT_T, {-1.0, 0.7, 4}, -1.0, 0},
    };
    static const double levels[] = {0.05, 0.3, 0.5, 0.8, 0.97};
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++)
        for (double f = 0.5; f <= 2.0; f *= 4) {
            tf_prior p, q;
            ck_assert_int_eq(tf_prior_init(&p, cases[c].kind, cases[c].par, -INFINITY, INFINITY, NULL), TF_OK);
            ck_assert_int_eq(tf_prior_rescale(&p, f, &q, NULL), TF_OK);
            ck_assert_int_eq(q.kind, p.kind);
            for (size_t l = 0; l < 5; l++) {
                double x = tf_prior_quantile(&p, levels[l]), y = tf_prior_quantile(&q, levels[l]);
                if (cases[c].log_scale) {
                    x = log(x);
                    y = log(y);
                }
                double want = cases[c].centre + f * (x - cases[c].centre);
                ck_assert_msg(fabs(y - want) <= 1e-9 * (1 + fabs(want)), "%s f %g level %g: %g, want %g",
                              tf_prior_kind_name(p.kind), f, levels[l], y, want);
            }
        }
    /* Truncation stays where it was. */
    tf_prior p, q;
    double par[2] = {1, 0};
    ck_assert_int_eq(tf_prior_init(&p, TF_PRIOR_HALFNORMAL, par, -INFINITY, 5, NULL), TF_OK);
    ck_assert_int_eq(tf_prior_rescale(&p, 2, &q, NULL), TF_OK);
    ck_assert(q.upper == 5 && q.par[0] == 2);
    ck_assert_int_eq(tf_prior_rescale(&p, 0, &q, NULL), TF_ERR_INVALID);
    ck_assert_int_eq(tf_prior_rescale(&p, INFINITY, &q, NULL), TF_ERR_INVALID);
}
END_TEST

START_TEST(prior_set_refuses_bad_names)
{
    tf_error err;
    tf_error_init(&err);
    tf_prior_set *s = (tf_prior_set *)&err; /* must be reset to NULL on failure */
    const char *dup[] = {"r", "K", "r"};
    ck_assert_int_eq(tf_prior_set_new(3, dup, NULL, NULL, &s, &err), TF_ERR_INVALID);
    ck_assert_ptr_null(s);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "'r' appears twice"));
    const char *empty[] = {"r", ""};
    ck_assert_int_eq(tf_prior_set_new(2, empty, NULL, NULL, &s, &err), TF_ERR_INVALID);
    /* Without model supports nothing is checked against them. */
    ck_assert_int_eq(tf_prior_set_new(1, dup, NULL, NULL, &s, &err), TF_OK);
    tf_prior p = make(TF_PRIOR_NORMAL, 0, 1, 0, -INFINITY, INFINITY);
    ck_assert_int_eq(tf_prior_set_assign(s, "r", &p, &err), TF_OK);
    tf_prior_set_free(s);
}
END_TEST

static Suite *make_suite(void)
{
    gsl_set_error_handler_off();
    Suite *s = suite_create("prior");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, known_values_match_scipy);
    tcase_add_test(tc, far_tail_truncation_keeps_precision);
    tcase_add_test(tc, densities_integrate_to_one);
    tcase_add_test(tc, draws_follow_the_distribution);
    tcase_add_test(tc, quantile_inverts_cdf);
    tcase_add_test(tc, supports_and_descriptions);
    tcase_add_test(tc, names_and_parameter_rules);
    tcase_add_test(tc, bad_priors_are_refused);
    tcase_add_test(tc, prior_set_sums_and_checks);
    tcase_add_test(tc, prior_set_refuses_bad_names);
    tcase_add_test(tc, rescaled_priors_stretch_about_their_centre);
    suite_add_tcase(s, tc);
    return s;
}
