/* Numerical faults at the library level: the particle filter's log-likelihood under extreme
 * parameters, efforts, first-year priors and counts must be -INFINITY or a finite number (never
 * NaN, never +inf), since a NaN would slip through every comparison a sampler makes. Where the
 * model becomes deterministic the value is checked against the closed form. */
#include "tf_test.h"
#include <float.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "filter/filter.h"
#include "model/model.h"
#include "survey/series.h"
#include "util/rng.h"

static tf_model *make(const char *g, const char *o)
{
    tf_model *m = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new(g, o, &m, &err), TF_OK);
    return m;
}

static tf_series *series(const double *y, const double *effort, size_t n)
{
    tf_error err;
    tf_error_init(&err);
    tf_series *s = tf_series_new("f", 2000, n, y, effort, NULL, &err);
    ck_assert_ptr_nonnull(s);
    return s;
}

/* Runs the filter at theta with 1, 7 and 256 particles, with and without a path and in the
 * fixed-random-number mode (all-zero normals), and checks that every estimate is -inf or finite.
 * Returns the estimate of the random mode with 256 particles and no path. */
static double loglik_all_ways(const tf_model *m, const tf_series *s, const double *theta, const char *what)
{
    static const size_t sizes[] = {1, 7, 256};
    double last = NAN;
    size_t T = tf_series_n_years(s);
    double *path = malloc(T * sizeof *path);
    for (size_t k = 0; k < sizeof sizes / sizeof sizes[0]; k++) {
        tf_filter *f = tf_filter_alloc(m, s, sizes[k]);
        ck_assert_ptr_nonnull(f);
        uint64_t key = k;
        tf_rng rng;
        tf_rng_derive(&rng, 11, &key, 1);
        double a = tf_filter_loglik(f, theta, &rng, NULL);
        double b = tf_filter_loglik(f, theta, &rng, path);
        double *zm = calloc(tf_filter_n_move(f), sizeof *zm), *zp = calloc(tf_filter_n_pick(f), sizeof *zp);
        double c = tf_filter_loglik_fixed(f, theta, zm, zp, path);
        double est[3] = {a, b, c};
        for (int i = 0; i < 3; i++)
            ck_assert_msg(!isnan(est[i]) && est[i] < INFINITY, "%s, %zu particles, way %d: %g", what, sizes[k], i,
                          est[i]);
        last = a;
        free(zm);
        free(zp);
        tf_filter_free(f);
    }
    free(path);
    return last;
}

/* Ordinary values of every parameter name any model uses. */
static double base_value(const char *name)
{
    static const struct {
        const char *name;
        double v;
    } base[] = {{"r", 0.1}, {"K", 200}, {"theta", 1.0}, {"sigma", 0.2}, {"tau", 0.3}, {"phi", 5}};
    for (size_t i = 0; i < sizeof base / sizeof base[0]; i++)
        if (!strcmp(base[i].name, name))
            return base[i].v;
    ck_abort_msg("no base value for parameter %s", name);
    return NAN;
}

/* Every parameter of every joined model, one at a time, set to extreme values (and just inside
 * and at the edge of its support); the others stay ordinary. A value outside the open support
 * must give -inf exactly. */
START_TEST(extreme_parameters_never_give_nan)
{
    static const double extremes[] = {1e300, -1e300, 1e-300, -1e-300, 5e-324, DBL_MAX, -DBL_MAX, DBL_MIN,
                                      INFINITY, -INFINITY, NAN, 0.0, 20.0, 19.999999, 5.0, 4.999999};
    const double y[] = {120, 95, 0, 130, NAN, 2000, 110, 1, 140, 1e9};
    tf_series *s = series(y, NULL, sizeof y / sizeof y[0]);
    for (size_t gi = 0; gi < tf_model_n_growth(); gi++)
        for (size_t oi = 0; oi < tf_model_n_obs(); oi++) {
            tf_model *m = make(tf_model_growth_at(gi)->name, tf_model_obs_at(oi)->name);
            tf_model_set_initial(m, log(120.0), 1.0);
            size_t n = tf_model_n_params(m);
            double theta[TF_MAX_PARAMS];
            for (size_t p = 0; p < n; p++)
                for (size_t e = 0; e < sizeof extremes / sizeof extremes[0]; e++) {
                    for (size_t q = 0; q < n; q++)
                        theta[q] = base_value(tf_model_param_name(m, q));
                    theta[p] = extremes[e];
                    char what[160];
                    snprintf(what, sizeof what, "%s, %s = %g", tf_model_name(m), tf_model_param_name(m, p), extremes[e]);
                    double ll = loglik_all_ways(m, s, theta, what);
                    int inside = theta[p] > tf_model_param_lower(m, p) && theta[p] < tf_model_param_upper(m, p);
                    if (!inside)
                        ck_assert_msg(ll == -INFINITY, "%s: outside the support but %g", what, ll);
                }
            tf_model_free(m);
        }
    tf_series_free(s);
}
END_TEST

/* The combinations named in the hardening plan: r = 1e300 (exponential: the only model that
 * allows it), K = 1e-300, theta at and just below its bound 20, sigma = 1e-300 and 1e300. */
START_TEST(named_extreme_vectors)
{
    const double y[] = {50, 61, 0, 75, 90, NAN, 120, 3, 150};
    tf_series *s = series(y, NULL, sizeof y / sizeof y[0]);
    static const struct {
        const char *g, *o;
        double theta[5];
    } cases[] = {
        {"exponential", "poisson", {1e300, 0.1}},
        {"exponential", "negbin", {1e300, 0.1, 2}},
        {"exponential", "lognormal", {-1e300, 0.1, 0.2}},
        {"ricker", "poisson", {0.5, 1e-300, 0.1}},
        {"ricker", "negbin", {4.9, 1e-300, 1e300, 1e300}},
        {"theta-logistic", "poisson", {0.5, 100, 20.0, 0.1}},
        {"theta-logistic", "negbin", {4.9, 1e-300, 19.9999, 0.1, 1e-300}},
        {"theta-logistic", "lognormal", {4.9, 1e300, 19.9999, 1e300, 1e-300}},
        {"gompertz", "poisson", {0.5, 1e-300, 1e-300}},
        {"gompertz", "negbin", {4.9, 1e300, 1e300, 1e300}},
        {"ricker", "poisson", {0.5, 100, 1e-300}},
        {"ricker", "poisson", {0.5, 100, 1e300}},
        {"exponential", "negbin", {0.0, 1e300, 1e-300}},
        {"gompertz", "lognormal", {4.9, 1.0 + 1e-15, 1e-300, 1e300}},
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        tf_model *m = make(cases[k].g, cases[k].o);
        tf_model_set_initial(m, log(50.0), 1.0);
        char what[96];
        snprintf(what, sizeof what, "case %zu (%s)", k, tf_model_name(m));
        double ll = loglik_all_ways(m, s, cases[k].theta, what);
        /* theta = 20 is on the bound of the open support (0, 20). */
        if (k == 5)
            ck_assert(ll == -INFINITY);
        tf_model_free(m);
    }
    tf_series_free(s);
}
END_TEST

/* Survey effort at the ends of what the importer lets through (positive, finite), and first-year
 * priors far from the counts. */
START_TEST(extreme_effort_and_first_year)
{
    const double y[] = {12, 0, 30, 41, 7, NAN, 19};
    const size_t T = sizeof y / sizeof y[0];
    static const double efforts[] = {1e300, DBL_MAX, 1e-300, 5e-324};
    static const double x1[][2] = {{1e300, 1}, {-1e300, 1}, {700, 1e-300}, {-745, 1e-300}, {0, 1e300}, {0, 5e-324}};
    for (size_t gi = 0; gi < tf_model_n_growth(); gi++)
        for (size_t oi = 0; oi < tf_model_n_obs(); oi++) {
            tf_model *m = make(tf_model_growth_at(gi)->name, tf_model_obs_at(oi)->name);
            double theta[TF_MAX_PARAMS];
            for (size_t q = 0; q < tf_model_n_params(m); q++)
                theta[q] = base_value(tf_model_param_name(m, q));
            char what[160];
            for (size_t e = 0; e < sizeof efforts / sizeof efforts[0]; e++) {
                double eff[sizeof y / sizeof y[0]];
                for (size_t t = 0; t < T; t++)
                    eff[t] = t % 2 ? efforts[e] : 1.0;
                tf_series *s = series(y, eff, T);
                tf_model_set_initial(m, log(20.0), 1.0);
                snprintf(what, sizeof what, "%s, effort %g", tf_model_name(m), efforts[e]);
                loglik_all_ways(m, s, theta, what);
                tf_series_free(s);
            }
            tf_series *s = series(y, NULL, T);
            for (size_t i = 0; i < sizeof x1 / sizeof x1[0]; i++) {
                tf_model_set_initial(m, x1[i][0], x1[i][1]);
                snprintf(what, sizeof what, "%s, x1 ~ N(%g, %g)", tf_model_name(m), x1[i][0], x1[i][1]);
                loglik_all_ways(m, s, theta, what);
            }
            tf_series_free(s);
            tf_model_free(m);
        }
}
END_TEST

/* log p(y | mu) of the Poisson distribution, y ln mu - mu - ln y! (its probability mass function
 * e^-mu mu^y / y!, common practice, no source). */
static double poisson_log(double y, double mu) { return y * log(mu) - mu - lgamma(y + 1.0); }

/* A survey with one non-zero count. With sigma and the first-year sd at 1e-300 every particle
 * follows x_t = x_1 + r (t - 1) exactly (the noise is below the rounding of x), so the filter's
 * estimate is the closed-form Poisson log-likelihood of the path, for any particle count. The
 * negative binomial tends to the Poisson as phi grows (variance mu + mu^2 / phi; Hilbe 2011,
 * Negative Binomial Regression, 2nd ed., sect. 8.2): at phi = 1e12 and beyond the two differ by
 * about sum mu^2 / (2 phi) < 1e-7 here. The log-normal cannot count a zero: -inf. */
START_TEST(one_nonzero_count)
{
    const double y[] = {0, 0, 0, 7, 0, 0, NAN, 0};
    const size_t T = sizeof y / sizeof y[0];
    tf_series *s = series(y, NULL, T);
    const double x1 = log(3.0), r = 0.1;
    double want = 0;
    for (size_t t = 0; t < T; t++)
        if (!isnan(y[t]))
            want += poisson_log(y[t], exp(x1 + r * (double)t));

    tf_model *m = make("exponential", "poisson");
    tf_model_set_initial(m, x1, 1e-300);
    const double theta_p[] = {r, 1e-300};
    double got = loglik_all_ways(m, s, theta_p, "one count, Poisson");
    /* Tolerance: a few hundred roundings of terms of size < 10 (about 1e-13). */
    ck_assert_msg(fabs(got - want) < 1e-9, "Poisson: %.12g, closed form %.12g", got, want);
    tf_model_free(m);

    m = make("exponential", "negbin");
    tf_model_set_initial(m, x1, 1e-300);
    static const double phis[] = {1e12, 1e15, 1e100, 1e300, 1e308};
    for (size_t i = 0; i < sizeof phis / sizeof phis[0]; i++) {
        const double theta_nb[] = {r, 1e-300, phis[i]};
        got = loglik_all_ways(m, s, theta_nb, "one count, negative binomial");
        ck_assert_msg(fabs(got - want) < 1e-6, "negbin phi %g: %.12g, Poisson limit %.12g", phis[i], got, want);
    }
    tf_model_free(m);

    m = make("exponential", "lognormal");
    tf_model_set_initial(m, x1, 1e-300);
    const double theta_ln[] = {r, 0.2, 0.3};
    ck_assert(loglik_all_ways(m, s, theta_ln, "one count, log-normal") == -INFINITY);
    tf_model_free(m);

    /* And with real process noise: a finite estimate, no NaN, for the count models. */
    for (size_t gi = 0; gi < tf_model_n_growth(); gi++) {
        tf_model *mm = make(tf_model_growth_at(gi)->name, "negbin");
        tf_model_set_initial(mm, x1, 1.0);
        double theta[TF_MAX_PARAMS];
        for (size_t q = 0; q < tf_model_n_params(mm); q++)
            theta[q] = base_value(tf_model_param_name(mm, q));
        double ll = loglik_all_ways(mm, s, theta, "one count, noisy");
        ck_assert_msg(isfinite(ll), "%s: %g", tf_model_name(mm), ll);
        tf_model_free(mm);
    }
    tf_series_free(s);
}
END_TEST

/* Every particle gets weight zero: in the first year, in a middle year, and in the last year (which
 * takes no resampling), under each way a weight can vanish: a count the model cannot produce
 * (a zero under the log-normal), an abundance that died out (x = -inf) facing a positive count,
 * and an abundance that overflowed. The estimate is -inf in every mode, with and without a path. */
START_TEST(all_particles_weight_zero)
{
    static const struct {
        const char *g, *o;
        double theta[4];
        double y[6];
    } cases[] = {
        {"ricker", "lognormal", {0.5, 100, 0.1, 0.2}, {0, 80, 90, 100, 95, 99}},
        {"ricker", "lognormal", {0.5, 100, 0.1, 0.2}, {80, 90, 0, 100, 95, 99}},
        {"ricker", "lognormal", {0.5, 100, 0.1, 0.2}, {80, 90, 95, 100, 95, 0}},
        /* r = -DBL_MAX: x_2 = -DBL_MAX is still finite but y x_2 is -inf; x_3 = -inf. */
        {"exponential", "poisson", {-DBL_MAX, 0.1}, {80, 90, 95, 100, 95, 99}},
        {"exponential", "poisson", {-DBL_MAX, 0.1}, {80, 0, 0, 0, 0, 99}},
        {"exponential", "poisson", {1e300, 0.1}, {80, 90, 95, 100, 95, 99}},
        {"exponential", "negbin", {1e300, 0.1, 3}, {80, 90, 95, 100, 95, 99}},
        {"ricker", "poisson", {4.9, 1e-320, 0.1}, {80, 90, 95, 100, 95, 99}},
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        tf_model *m = make(cases[k].g, cases[k].o);
        tf_model_set_initial(m, log(85.0), 0.1);
        tf_series *s = series(cases[k].y, NULL, 6);
        static const size_t sizes[] = {1, 7, 256};
        for (size_t j = 0; j < sizeof sizes / sizeof sizes[0]; j++) {
            tf_filter *f = tf_filter_alloc(m, s, sizes[j]);
            uint64_t key = k;
            tf_rng rng;
            tf_rng_derive(&rng, 5, &key, 1);
            double path[6];
            double *zm = calloc(tf_filter_n_move(f), sizeof *zm), *zp = calloc(tf_filter_n_pick(f), sizeof *zp);
            double a = tf_filter_loglik(f, cases[k].theta, &rng, NULL);
            double b = tf_filter_loglik(f, cases[k].theta, &rng, path);
            double c = tf_filter_loglik_fixed(f, cases[k].theta, zm, zp, NULL);
            double d = tf_filter_loglik_fixed(f, cases[k].theta, zm, zp, path);
            ck_assert_msg(a == -INFINITY && b == -INFINITY && c == -INFINITY && d == -INFINITY,
                          "case %zu, %zu particles: %g %g %g %g", k, sizes[j], a, b, c, d);
            free(zm);
            free(zp);
            tf_filter_free(f);
        }
        tf_series_free(s);
        tf_model_free(m);
    }
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("faults");
    TCase *tc = tcase_create("faults");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, extreme_parameters_never_give_nan);
    tcase_add_test(tc, named_extreme_vectors);
    tcase_add_test(tc, extreme_effort_and_first_year);
    tcase_add_test(tc, one_nonzero_count);
    tcase_add_test(tc, all_particles_weight_zero);
    suite_add_tcase(s, tc);
    return s;
}
