/* Unit tests for the projection: risk curves, bands, declines, model averaging, Monte Carlo error. */
#include "tf_test.h"
#include <math.h>
#include <string.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "project/cautions.h"
#include "project/project.h"

/* Local growth rows, so the tests depend on the projection alone. The exponential row is the
 * density-independent model x' = x + r (Dennis, Munholland & Scott 1991, eq. 1 on the log scale). */
static const char *const exp_names[] = {"r"};
static const double exp_lower[] = {-INFINITY}, exp_upper[] = {INFINITY};
static void exp_drift(const double *p, const double *x, double *out, size_t n)
{
    for (size_t i = 0; i < n; i++)
        out[i] = x[i] + p[0];
}
static const tf_growth_type exp_growth = {"exp", "Exponential", 1, exp_names, exp_lower, exp_upper, exp_drift};

/* Ricker on the log scale: x' = x + r (1 - e^x / K) (Ricker 1954). */
static const char *const ricker_names[] = {"r", "K"};
static const double ricker_lower[] = {-INFINITY, 0}, ricker_upper[] = {INFINITY, INFINITY};
static void ricker_drift(const double *p, const double *x, double *out, size_t n)
{
    for (size_t i = 0; i < n; i++)
        out[i] = x[i] + p[0] * (1.0 - exp(x[i]) / p[1]);
}
static const tf_growth_type ricker_growth = {"ricker", "Ricker",     2,
                                             ricker_names, ricker_lower, ricker_upper, ricker_drift};

/* A broken drift, to provoke the non-number check. */
static void nan_drift(const double *p, const double *x, double *out, size_t n)
{
    for (size_t i = 0; i < n; i++)
        out[i] = (x[i] > 3.0) ? NAN : x[i] + p[0];
}
static const tf_growth_type nan_growth = {"broken", "Broken", 1, exp_names, exp_lower, exp_upper, nan_drift};

/* One exponential draw {r, sigma} from N0. Storage belongs to the caller. */
typedef struct {
    double theta[2];
    double x0;
} fixed_draw;

static tf_project_input exp_input(fixed_draw *f, double r, double sigma, double n0, double weight)
{
    f->theta[0] = r;
    f->theta[1] = sigma;
    f->x0 = log(n0);
    return (tf_project_input){&exp_growth, 1, 2, 1, f->theta, &f->x0, weight};
}

static tf_rng seeded(uint64_t seed)
{
    tf_rng rng;
    uint64_t key = 11;
    tf_rng_derive(&rng, seed, &key, 1);
    return rng;
}

static tf_projection *run_ok(const tf_project_input *in, size_t n, const tf_project_options *o, uint64_t seed)
{
    tf_error err;
    tf_error_init(&err);
    tf_rng rng = seeded(seed);
    tf_projection *p = NULL;
    tf_status st = tf_project_run(in, n, o, &rng, &p, &err);
    if (st)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    ck_assert_ptr_nonnull(p);
    return p;
}

static tf_status run_status(const tf_project_input *in, size_t n, const tf_project_options *o)
{
    tf_error err;
    tf_error_init(&err);
    tf_rng rng = seeded(1);
    tf_projection *p = (tf_projection *)&err; /* must come back NULL */
    tf_status st = tf_project_run(in, n, o, &rng, &p, &err);
    ck_assert_ptr_null(p);
    ck_assert_int_eq(tf_error_status(&err), st);
    return st;
}

static void set_thresholds(tf_project_options *o, const char *text)
{
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_project_parse_thresholds(text, o->thresholds, TF_PROJECT_MAX_THRESHOLDS, &o->n_thresholds,
                                                 &err),
                     TF_OK);
}

/* Every number a projection reports, for bit-for-bit comparisons. */
static int same_projection(const tf_projection *a, const tf_projection *b)
{
    size_t H = tf_projection_horizon(a);
    if (H != tf_projection_horizon(b) || tf_projection_n_runs(a) != tf_projection_n_runs(b))
        return 0;
    for (size_t t = 0; t <= H; t++) {
        for (int q = 0; q < TF_BAND_COUNT; q++) {
            double u = tf_projection_band(a, t, (tf_band)q), v = tf_projection_band(b, t, (tf_band)q);
            if (memcmp(&u, &v, sizeof u))
                return 0;
        }
        for (size_t k = 0; k < tf_projection_n_thresholds(a); k++)
            if (tf_projection_risk(a, k, t) != tf_projection_risk(b, k, t))
                return 0;
    }
    for (size_t w = 0; w < tf_projection_n_windows(a); w++)
        for (size_t d = 0; d < tf_projection_n_declines(a); d++)
            if (tf_projection_decline_prob(a, w, d) != tf_projection_decline_prob(b, w, d))
                return 0;
    return 1;
}

START_TEST(thresholds_parse)
{
    tf_threshold t[4];
    size_t n;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_project_parse_thresholds("50,100,20%", t, 4, &n, &err), TF_OK);
    ck_assert_uint_eq(n, 3);
    ck_assert(t[0].value == 50 && !t[0].relative);
    ck_assert(t[1].value == 100 && !t[1].relative);
    ck_assert(fabs(t[2].value - 0.2) < 1e-15 && t[2].relative);
    char buf[32];
    ck_assert_str_eq(tf_project_threshold_label(&t[2], buf, sizeof buf), "20%");
    ck_assert_str_eq(tf_project_threshold_label(&t[0], buf, sizeof buf), "50");

    const char *parse_bad[] = {"", "abc", "50,,100", "50,", "%", "12x", "nan", "1e999"};
    for (size_t i = 0; i < sizeof parse_bad / sizeof *parse_bad; i++) {
        tf_error_init(&err);
        ck_assert_int_eq(tf_project_parse_thresholds(parse_bad[i], t, 4, &n, &err), TF_ERR_PARSE);
        ck_assert_uint_eq(err.n_items, 1);
    }
    const char *range_bad[] = {"0", "-5", "0%", "150%", "1,2,3,4,5"};
    for (size_t i = 0; i < sizeof range_bad / sizeof *range_bad; i++) {
        tf_error_init(&err);
        ck_assert_int_eq(tf_project_parse_thresholds(range_bad[i], t, 4, &n, &err), TF_ERR_RANGE);
    }
}
END_TEST

/* Exact monotonicity: a run counted by year t stays counted, and a run at or below a lower
 * threshold is at or below every higher one. Same runs, so these hold without Monte Carlo error. */
START_TEST(risk_monotone_in_time_and_threshold)
{
    fixed_draw f;
    tf_project_input in = exp_input(&f, -0.02, 0.2, 300, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    set_thresholds(&o, "20,50,100,150");
    o.n_runs = 3000;
    tf_projection *p = run_ok(&in, 1, &o, 5);
    for (size_t k = 0; k < 4; k++)
        for (size_t t = 0; t <= 50; t++) {
            double r = tf_projection_risk(p, k, t);
            ck_assert(r >= 0 && r <= 1);
            if (t > 0)
                ck_assert(r >= tf_projection_risk(p, k, t - 1));
            if (k > 0)
                ck_assert(r >= tf_projection_risk(p, k - 1, t));
        }
    /* Not a degenerate case: the lowest threshold is reached by some but not all runs. */
    ck_assert(tf_projection_risk(p, 0, 50) > 0.05 && tf_projection_risk(p, 0, 50) < 0.95);
    tf_projection_free(p);
}
END_TEST

START_TEST(threshold_above_start_is_certain_at_year_zero)
{
    fixed_draw f;
    tf_project_input in = exp_input(&f, 0.1, 0.1, 80, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    set_thresholds(&o, "100,80,50,100%");
    o.n_runs = 500;
    tf_projection *p = run_ok(&in, 1, &o, 9);
    ck_assert(tf_projection_risk(p, 0, 0) == 1.0); /* 80 <= 100 */
    ck_assert(tf_projection_risk(p, 1, 0) == 1.0); /* "to or below": equal counts */
    ck_assert(tf_projection_risk(p, 2, 0) == 0.0);
    ck_assert(tf_projection_risk(p, 3, 0) == 1.0); /* 100 % of the start */
    ck_assert(tf_projection_risk_se(p, 0, 0) == 0.0);
    ck_assert(tf_projection_median_time(p, 0) == 0.0);
    tf_projection_free(p);
}
END_TEST

/* sigma -> 0 with r = 0: x_t = x_0 for every run, so every band equals N0 (to rounding of exp(log)). */
START_TEST(no_noise_no_growth_is_constant)
{
    fixed_draw f;
    tf_project_input in = exp_input(&f, 0.0, 1e-12, 250, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    set_thresholds(&o, "249,50%");
    o.n_runs = 200;
    tf_projection *p = run_ok(&in, 1, &o, 3);
    for (size_t t = 0; t <= 50; t++) {
        for (int q = 0; q < TF_BAND_COUNT; q++)
            ck_assert_double_eq_tol(tf_projection_band(p, t, (tf_band)q), 250.0, 1e-8);
        ck_assert(tf_projection_risk(p, 0, t) == 0.0);
        ck_assert(tf_projection_risk(p, 1, t) == 0.0);
    }
    ck_assert(isnan(tf_projection_median_time(p, 0)));
    for (size_t d = 0; d < 3; d++)
        ck_assert(tf_projection_decline_prob(p, 0, d) == 0.0);
    tf_projection_free(p);
}
END_TEST

/* Deterministic declines (sigma tiny): N(t) = N0 e^{r t}. r = ln 0.96 gives a 33.5 % loss in 10
 * years and 72.9 % in 32; r = ln 0.6 loses 99.4 % in 10. Thresholds: 100 e^{-0.1 t} <= 50 first at
 * t = 7 (ln 2 / 0.1 = 6.93). */
START_TEST(deterministic_declines_and_median_time)
{
    fixed_draw f;
    tf_project_input in = exp_input(&f, log(0.96), 1e-9, 1000, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    o.decline_window = 32;
    o.horizon = 20;
    o.n_runs = 100;
    tf_projection *p = run_ok(&in, 1, &o, 1);
    ck_assert_uint_eq(tf_projection_n_windows(p), 2);
    ck_assert_uint_eq(tf_projection_window(p, 0), 10);
    ck_assert_uint_eq(tf_projection_window(p, 1), 32); /* beyond the horizon: simulated anyway */
    ck_assert_uint_eq(tf_projection_n_declines(p), 3);
    ck_assert(tf_projection_decline(p, 1) == 0.5);
    double want10[3] = {1, 0, 0}, want32[3] = {1, 1, 0};
    for (size_t d = 0; d < 3; d++) {
        ck_assert(tf_projection_decline_prob(p, 0, d) == want10[d]);
        ck_assert(tf_projection_decline_prob(p, 1, d) == want32[d]);
    }
    tf_projection_free(p);

    in = exp_input(&f, log(0.6), 1e-9, 1000, 1);
    o.decline_window = 0;
    p = run_ok(&in, 1, &o, 1);
    ck_assert_uint_eq(tf_projection_n_windows(p), 1);
    for (size_t d = 0; d < 3; d++)
        ck_assert(tf_projection_decline_prob(p, 0, d) == 1.0);
    tf_projection_free(p);

    in = exp_input(&f, -0.1, 1e-9, 100, 1);
    set_thresholds(&o, "50,1");
    p = run_ok(&in, 1, &o, 1);
    ck_assert(tf_projection_median_time(p, 0) == 7.0);
    ck_assert(tf_projection_risk(p, 0, 6) == 0.0 && tf_projection_risk(p, 0, 7) == 1.0);
    ck_assert(isnan(tf_projection_median_time(p, 1))); /* 100 e^-2 = 13.5 > 1 at year 20 */
    tf_projection_free(p);
}
END_TEST

/* A relative threshold follows each draw's own start: two draws starting at 100 and 10000 that
 * both lose 60 % in 10 years cross "50%" at the same year while the absolute "60" is crossed only by
 * the small one. */
START_TEST(relative_threshold_per_run)
{
    double theta[4] = {log(0.4) / 10, 1e-9, log(0.4) / 10, 1e-9};
    double x0[2] = {log(100), log(10000)};
    tf_project_input in = {&exp_growth, 1, 2, 2, theta, x0, 1};
    tf_project_options o;
    tf_project_options_init(&o);
    set_thresholds(&o, "50%,60");
    o.horizon = 12;
    o.n_runs = 10;
    tf_projection *p = run_ok(&in, 1, &o, 2);
    /* 0.4^{t/10} <= 0.5 first at t = 8 (10 ln 2 / ln 2.5 = 7.56). */
    ck_assert(tf_projection_risk(p, 0, 7) == 0.0);
    ck_assert(tf_projection_risk(p, 0, 8) == 1.0);
    /* 100 * 0.4^{t/10} <= 60 from t = 6 (5.57); the large draw never. */
    ck_assert(tf_projection_risk(p, 1, 5) == 0.0);
    ck_assert(tf_projection_risk(p, 1, 6) == 0.5);
    ck_assert(tf_projection_risk(p, 1, 12) == 0.5);
    ck_assert(tf_projection_median_time(p, 1) == 6.0);
    tf_projection_free(p);
}
END_TEST

/* Runs cycle through the draws: 3 draws, 7 runs -> 2, 2, 3 runs (floor(d R / D) boundaries 0, 2, 4,
 * 7). Growth rates +1, -0.5, -1 from N0 = 10 give N(1) = 27.2, 6.07, 3.68, so threshold 5 marks the
 * runs of draw 3 and threshold 8 those of draws 2 and 3. */
START_TEST(runs_cycle_through_draws)
{
    double theta[6] = {1, 1e-12, -0.5, 1e-12, -1, 1e-12};
    double x0[3] = {log(10), log(10), log(10)};
    tf_project_input in = {&exp_growth, 1, 2, 3, theta, x0, 1};
    tf_project_options o;
    tf_project_options_init(&o);
    o.n_runs = 7;
    o.horizon = 1;
    set_thresholds(&o, "5,8");
    tf_projection *p = run_ok(&in, 1, &o, 4);
    ck_assert(tf_projection_risk(p, 0, 0) == 0.0 && tf_projection_risk(p, 1, 0) == 0.0);
    ck_assert_double_eq_tol(tf_projection_risk(p, 0, 1), 3.0 / 7, 1e-15);
    ck_assert_double_eq_tol(tf_projection_risk(p, 1, 1), 5.0 / 7, 1e-15);
    tf_projection_free(p);

    /* Fewer runs than draws: an evenly spaced subset. 2 runs of 3 draws: d = 0 gets [0, 0), d = 1
     * [0, 1), d = 2 [1, 2), i.e. growth -0.5 and -1. */
    o.n_runs = 2;
    p = run_ok(&in, 1, &o, 4);
    ck_assert(tf_projection_risk(p, 0, 1) == 0.5);
    ck_assert(tf_projection_risk(p, 1, 1) == 1.0);
    tf_projection_free(p);
}
END_TEST

START_TEST(one_model_at_weight_one_is_that_model)
{
    fixed_draw fa;
    tf_project_input a = exp_input(&fa, -0.01, 0.15, 400, 1.0);
    double rk[3] = {0.5, 300, 0.2}, rx = log(50);
    tf_project_input b = {&ricker_growth, 2, 3, 1, rk, &rx, 0.0};
    tf_project_options o;
    tf_project_options_init(&o);
    set_thresholds(&o, "100,30%");
    o.n_runs = 1001;
    o.decline_window = 21;
    tf_projection *alone = run_ok(&a, 1, &o, 77);
    tf_project_input ab[2] = {a, b}, ba[2] = {b, a};
    tf_projection *p1 = run_ok(ab, 2, &o, 77);
    tf_projection *p2 = run_ok(ba, 2, &o, 77);
    ck_assert(same_projection(alone, p1));
    ck_assert(same_projection(alone, p2));
    ck_assert_uint_eq(tf_projection_input_runs(p1, 0), 1001);
    ck_assert_uint_eq(tf_projection_input_runs(p1, 1), 0);
    ck_assert_uint_eq(tf_projection_input_runs(p2, 0), 0);
    ck_assert_uint_eq(tf_projection_input_runs(p2, 1), 1001);
    tf_projection_free(alone);
    tf_projection_free(p1);
    tf_projection_free(p2);
}
END_TEST

/* Equal weights halve the runs; a model certain to cross (r = -1 a year) averaged with one that
 * never does (r = +1) gives exactly the share of the first. Largest remainder: 0.2/0.3/0.5 of 11
 * runs -> quotas 2.2, 3.3, 5.5 -> 2, 3, 6; equal halves of 7 -> 4, 3 (tie to the earlier). */
START_TEST(weights_split_runs)
{
    fixed_draw fa, fb, fc;
    tf_project_input in[3] = {exp_input(&fa, -1, 1e-9, 100, 0.5), exp_input(&fb, 1, 1e-9, 100, 0.5),
                              exp_input(&fc, 0, 1e-9, 100, 0)};
    tf_project_options o;
    tf_project_options_init(&o);
    set_thresholds(&o, "10");
    o.n_runs = 1000;
    o.horizon = 10;
    tf_projection *p = run_ok(in, 2, &o, 8);
    ck_assert_uint_eq(tf_projection_input_runs(p, 0), 500);
    ck_assert_uint_eq(tf_projection_input_runs(p, 1), 500);
    ck_assert(tf_projection_risk(p, 0, 10) == 0.5);
    ck_assert(tf_projection_risk(p, 0, 2) == 0.0);  /* 100 e^-2 = 13.5 */
    ck_assert(tf_projection_risk(p, 0, 3) == 0.5);  /* 100 e^-3 = 5.0 */
    ck_assert(tf_projection_median_time(p, 0) == 3.0);
    tf_projection_free(p);

    o.n_runs = 7;
    p = run_ok(in, 2, &o, 8);
    ck_assert_uint_eq(tf_projection_input_runs(p, 0), 4);
    ck_assert_uint_eq(tf_projection_input_runs(p, 1), 3);
    tf_projection_free(p);

    in[0].weight = 0.2;
    in[1].weight = 0.3;
    in[2].weight = 0.5;
    o.n_runs = 11;
    p = run_ok(in, 3, &o, 8);
    ck_assert_uint_eq(tf_projection_input_runs(p, 0), 2);
    ck_assert_uint_eq(tf_projection_input_runs(p, 1), 3);
    ck_assert_uint_eq(tf_projection_input_runs(p, 2), 6);
    tf_projection_free(p);

    /* Unnormalised weights give the same split. */
    in[0].weight = 2;
    in[1].weight = 3;
    in[2].weight = 5;
    p = run_ok(in, 3, &o, 8);
    ck_assert_uint_eq(tf_projection_input_runs(p, 2), 6);
    tf_projection_free(p);
}
END_TEST

/* The formula itself, then its meaning: over M independent seeds the spread of the estimated risk
 * matches sqrt(p (1-p) / n). With M = 400 replicates the sample sd has relative sd about
 * 1/sqrt(2 (M-1)) = 3.5 %; the tolerance is 5 of those (18 %). */
START_TEST(monte_carlo_error)
{
    ck_assert_double_eq_tol(tf_project_se(0.2, 400), 0.02, 1e-15);
    ck_assert(tf_project_se(0, 10) == 0 && tf_project_se(1, 10) == 0);
    ck_assert(isnan(tf_project_se(0.5, 0)) && isnan(tf_project_se(1.5, 10)) && isnan(tf_project_se(NAN, 10)));

    fixed_draw f;
    tf_project_input in = exp_input(&f, -0.02, 0.2, 300, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    set_thresholds(&o, "100");
    o.n_runs = 400;
    o.horizon = 30;
    enum { M = 400 };
    double s = 0, ss = 0, se_sum = 0;
    for (int m = 0; m < M; m++) {
        tf_projection *p = run_ok(&in, 1, &o, 1000 + (uint64_t)m);
        double r = tf_projection_risk(p, 0, 30);
        ck_assert(tf_projection_risk_se(p, 0, 30) == tf_project_se(r, 400));
        s += r;
        ss += r * r;
        se_sum += tf_projection_risk_se(p, 0, 30);
        tf_projection_free(p);
    }
    double mean = s / M, sd = sqrt((ss - M * mean * mean) / (M - 1));
    double se = se_sum / M;
    ck_assert_msg(mean > 0.1 && mean < 0.9, "risk %g too close to 0 or 1 for the check", mean);
    ck_assert_msg(fabs(sd / se - 1) < 0.18, "spread over seeds %g vs formula %g", sd, se);
}
END_TEST

START_TEST(deterministic_with_seed)
{
    fixed_draw f;
    tf_project_input in = exp_input(&f, 0.01, 0.3, 120, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    set_thresholds(&o, "60");
    o.n_runs = 2000;
    tf_projection *a = run_ok(&in, 1, &o, 42), *b = run_ok(&in, 1, &o, 42), *c = run_ok(&in, 1, &o, 43);
    ck_assert(same_projection(a, b));
    ck_assert(!same_projection(a, c));
    tf_projection_free(a);
    tf_projection_free(b);
    tf_projection_free(c);
}
END_TEST

/* Bands against the exact law of the exponential model: x_t ~ Normal(x0 + r t, sigma^2 t), so the
 * median of N at t is N0 e^{r t} and the 95 % point N0 e^{r t + 1.6449 sigma sqrt t} (normal
 * quantile z_0.95 = 1.644854, Abramowitz & Stegun 1964, table 26.5). With n = 20000 runs a sample
 * quantile of x has sd sqrt(q (1-q) / n) / phi(z_q) in units of sigma sqrt t (asymptotic normality
 * of sample quantiles, e.g. Serfling 1980, sec. 2.3.3): 0.0089 at q = 0.5 and 0.0150 at q = 0.05
 * and 0.95. Tolerances are 5 sd on the log scale. */
START_TEST(bands_follow_lognormal_law)
{
    fixed_draw f;
    double r = 0.03, sigma = 0.25, n0 = 500;
    tf_project_input in = exp_input(&f, r, sigma, n0, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    o.n_runs = 20000;
    o.horizon = 25;
    tf_projection *p = run_ok(&in, 1, &o, 6);
    size_t ts[3] = {1, 10, 25};
    for (int i = 0; i < 3; i++) {
        double t = (double)ts[i], s = sigma * sqrt(t);
        double med = log(tf_projection_band(p, ts[i], TF_BAND_MEDIAN));
        double hi = log(tf_projection_band(p, ts[i], TF_BAND_P975));
        double lo = log(tf_projection_band(p, ts[i], TF_BAND_P025));
        ck_assert_double_eq_tol(med, log(n0) + r * t, 5 * 0.0089 * s);
        /* Standard error of the 2.5 % sample quantile of 20000 normal draws, in sd units:
         * sqrt(q (1 - q) / n) / phi(z_q) = 0.001104 / 0.05845 = 0.0189 (asymptotic quantile
         * variance, e.g. Serfling 1980, section 2.3.3); five of them. */
        ck_assert_double_eq_tol(hi, log(n0) + r * t + 1.959964 * s, 5 * 0.0189 * s);
        ck_assert_double_eq_tol(lo, log(n0) + r * t - 1.959964 * s, 5 * 0.0189 * s);
        ck_assert(tf_projection_band(p, ts[i], TF_BAND_P25) < exp(med));
        ck_assert(tf_projection_band(p, ts[i], TF_BAND_P75) > exp(med));
    }
    for (int q = 0; q < TF_BAND_COUNT; q++)
        ck_assert_double_eq_tol(tf_projection_band(p, 0, (tf_band)q), n0, 1e-9);
    ck_assert(isnan(tf_projection_band(p, 26, TF_BAND_MEDIAN)));
    ck_assert(tf_project_band_level(TF_BAND_P25) == 0.25 && isnan(tf_project_band_level(TF_BAND_COUNT)));
    tf_projection_free(p);
}
END_TEST

/* The bands by selection against GSL's quantile of sorted data (gsl_stats_quantile_from_sorted_data,
 * GSL reference manual, "Median and Percentiles") on the same values: with r = 0 and sigma = 0 every
 * year holds the starts of the draws. Ties (repeated starts) and an even count included. */
START_TEST(bands_match_gsl_quantiles)
{
    enum { D = 1000 };
    static double theta[2 * D], x0[D], sorted[D];
    tf_rng rng = seeded(99);
    for (size_t d = 0; d < D; d++) {
        theta[2 * d] = 0;
        theta[2 * d + 1] = 0;
        x0[d] = d % 7 == 0 ? 4.0 : 3 + 2 * tf_rng_uniform(&rng);
    }
    tf_project_input in = {&exp_growth, 1, 2, D, theta, x0, 1};
    tf_project_options o;
    tf_project_options_init(&o);
    o.n_runs = D;
    o.horizon = 3;
    tf_projection *p = run_ok(&in, 1, &o, 1);
    for (size_t d = 0; d < D; d++)
        sorted[d] = exp(x0[d]);
    gsl_sort(sorted, 1, D);
    for (size_t t = 0; t <= 3; t++)
        for (int q = 0; q < TF_BAND_COUNT; q++)
            ck_assert(tf_projection_band(p, t, (tf_band)q) ==
                      gsl_stats_quantile_from_sorted_data(sorted, 1, D, tf_project_band_level((tf_band)q)));
    tf_projection_free(p);
}
END_TEST

START_TEST(stop_flag_interrupts)
{
    fixed_draw f;
    tf_project_input in = exp_input(&f, 0, 0.1, 100, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    volatile sig_atomic_t stop = 1;
    o.stop = &stop;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_INTERRUPTED);
    stop = 0;
    tf_projection *p = run_ok(&in, 1, &o, 1);
    tf_projection_free(p);
}
END_TEST

/* Growth of 10 a year for 50 years would reach e^{504}: the bound keeps every band finite. */
START_TEST(log_abundance_is_capped)
{
    fixed_draw f;
    tf_project_input in = exp_input(&f, 10, 0.1, 100, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    o.n_runs = 50;
    tf_projection *p = run_ok(&in, 1, &o, 1);
    ck_assert_double_eq_tol(tf_projection_band(p, 50, TF_BAND_P975), exp(TF_PROJECT_LOG_MAX), 1e-6 * exp(50));
    ck_assert(isfinite(tf_projection_band(p, 50, TF_BAND_P025)));
    tf_projection_free(p);

    in = exp_input(&f, -10, 0.1, 100, 1);
    set_thresholds(&o, "1e-20");
    p = run_ok(&in, 1, &o, 1);
    ck_assert(tf_projection_band(p, 50, TF_BAND_MEDIAN) >= exp(TF_PROJECT_LOG_MIN));
    ck_assert(tf_projection_risk(p, 0, 50) == 1.0);
    tf_projection_free(p);
}
END_TEST

START_TEST(bad_input_is_refused)
{
    fixed_draw f;
    tf_project_input in = exp_input(&f, -0.01, 0.1, 100, 1);
    tf_project_options o;
    tf_project_options_init(&o);
    o.n_runs = 10;

    o.horizon = 0;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.horizon = TF_PROJECT_MAX_HORIZON + 1;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.horizon = 50;
    o.decline_window = TF_PROJECT_MAX_HORIZON + 1;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.decline_window = 0;
    o.declines[0] = 1.0;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.declines[0] = 0.3;
    o.n_thresholds = 1;
    o.thresholds[0] = (tf_threshold){0, 0};
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.thresholds[0] = (tf_threshold){1.5, 1};
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.n_thresholds = 0;
    o.n_runs = 100000000;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.n_runs = 10;

    ck_assert_int_eq(run_status(&in, 0, &o), TF_ERR_INVALID);
    in.weight = -1;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    in.weight = 0;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_INVALID);
    in.weight = NAN;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    in.weight = 1;
    f.theta[1] = -0.1;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    f.theta[1] = 0.1;
    f.theta[0] = INFINITY;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    f.theta[0] = 0;
    f.x0 = 60;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    f.x0 = NAN;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    f.x0 = 1;
    in.sigma_index = 0; /* sigma among the drift parameters */
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_INVALID);
    in.sigma_index = 1;
    in.n_draws = 0;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_INVALID);
    in.n_draws = 1;

    double rk[3] = {0.5, -3, 0.2}, rx = 1;
    tf_project_input ricker = {&ricker_growth, 2, 3, 1, rk, &rx, 1};
    ck_assert_int_eq(run_status(&ricker, 1, &o), TF_ERR_RANGE); /* K outside (0, inf) */

    tf_project_input broken = in;
    broken.growth = &nan_growth;
    f.x0 = 0;
    f.theta[0] = 1; /* passes x = 3 in year 3 */
    ck_assert_int_eq(run_status(&broken, 1, &o), TF_ERR_NUMERIC);
}
END_TEST

START_TEST(cautions_present)
{
    ck_assert_uint_ge(tf_project_n_cautions(), 3);
    for (size_t i = 0; i < tf_project_n_cautions(); i++)
        ck_assert(strlen(tf_project_caution(i)) > 20);
    ck_assert_ptr_null(tf_project_caution(tf_project_n_cautions()));
    ck_assert_ptr_nonnull(strstr(tf_project_caution(1), "not a formal status listing"));
    ck_assert_ptr_nonnull(strstr(tf_project_caution(2), "responsible authority"));
    ck_assert_ptr_nonnull(tf_project_caution_fixed());
}
END_TEST

/* The input built from a joined model takes rows in the model's order, whose counting-error
 * values are ignored: Ricker + negative binomial rows {r, K, sigma, phi} with phi = NAN give, bit
 * for bit, the projection of the same draws as {r, K, sigma} rows. */
START_TEST(input_from_model_uses_the_model_order)
{
    tf_error err;
    tf_error_init(&err);
    tf_model *m = NULL;
    ck_assert_int_eq(tf_model_new("ricker", "negbin", &m, &err), TF_OK);
    ck_assert_uint_eq(tf_model_n_params(m), 4);
    double rows[2][4] = {{0.4, 300, 0.2, NAN}, {0.1, 150, 0.05, NAN}};
    double short_rows[2][3] = {{0.4, 300, 0.2}, {0.1, 150, 0.05}};
    double x_last[2] = {log(120), log(80)};
    tf_project_input in = tf_project_input_from_model(m, &rows[0][0], 2, x_last, 2.5);
    ck_assert_ptr_eq(in.growth, tf_model_growth(m));
    ck_assert_uint_eq(in.sigma_index, 2);
    ck_assert_uint_eq(in.n_params, 4);
    ck_assert_uint_eq(in.n_draws, 2);
    ck_assert(in.weight == 2.5);
    tf_project_input by_hand = {tf_model_growth(m), 2, 3, 2, &short_rows[0][0], x_last, 1.0};
    tf_project_options o;
    tf_project_options_init(&o);
    o.horizon = 15;
    o.n_runs = 200;
    set_thresholds(&o, "60,40%");
    tf_projection *a = run_ok(&in, 1, &o, 8), *b = run_ok(&by_hand, 1, &o, 8);
    ck_assert(same_projection(a, b));
    tf_projection_free(a);
    tf_projection_free(b);
    tf_model_free(m);
}
END_TEST

/* opts.start replaces every draw's start and nothing else: draws with their own starts of 120 and
 * 80 give, bit for bit, the projection of the same draws all starting from 100, and their own
 * starts are not read (even a NAN one is accepted). A start outside the bounds is refused. */
START_TEST(start_option_overrides_every_draw)
{
    double rows[2][3] = {{0.4, 300, 0.2}, {0.1, 150, 0.05}};
    double own[2] = {log(120), NAN}, common[2] = {log(100), log(100)};
    tf_project_input in = {&ricker_growth, 2, 3, 2, &rows[0][0], own, 1};
    tf_project_input same = {&ricker_growth, 2, 3, 2, &rows[0][0], common, 1};
    tf_project_options o;
    tf_project_options_init(&o);
    o.horizon = 20;
    o.n_runs = 300;
    set_thresholds(&o, "90,50%");
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE); /* its own NAN start */
    tf_projection *b = run_ok(&same, 1, &o, 6);
    o.start = 100;
    tf_projection *a = run_ok(&in, 1, &o, 6);
    ck_assert(same_projection(a, b));
    /* Year 0 holds the given start in every run; 90 is below it, 50 % of it is not reached. */
    ck_assert_double_eq_tol(tf_projection_band(a, 0, TF_BAND_P025), 100, 1e-9);
    ck_assert(tf_projection_risk(a, 0, 0) == 0.0);
    tf_projection_free(a);
    tf_projection_free(b);
    o.start = -1;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.start = NAN;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
    o.start = 1e30;
    ck_assert_int_eq(run_status(&in, 1, &o), TF_ERR_RANGE);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("project");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 30);
    tcase_add_test(tc, thresholds_parse);
    tcase_add_test(tc, risk_monotone_in_time_and_threshold);
    tcase_add_test(tc, threshold_above_start_is_certain_at_year_zero);
    tcase_add_test(tc, no_noise_no_growth_is_constant);
    tcase_add_test(tc, deterministic_declines_and_median_time);
    tcase_add_test(tc, relative_threshold_per_run);
    tcase_add_test(tc, runs_cycle_through_draws);
    tcase_add_test(tc, one_model_at_weight_one_is_that_model);
    tcase_add_test(tc, weights_split_runs);
    tcase_add_test(tc, monte_carlo_error);
    tcase_add_test(tc, deterministic_with_seed);
    tcase_add_test(tc, bands_follow_lognormal_law);
    tcase_add_test(tc, bands_match_gsl_quantiles);
    tcase_add_test(tc, stop_flag_interrupts);
    tcase_add_test(tc, log_abundance_is_capped);
    tcase_add_test(tc, bad_input_is_refused);
    tcase_add_test(tc, cautions_present);
    tcase_add_test(tc, input_from_model_uses_the_model_order);
    tcase_add_test(tc, start_option_overrides_every_draw);
    suite_add_tcase(s, tc);
    return s;
}
