/* Unit tests for the particle-count tuning. */
#include "tf_test.h"
#include <math.h>
#include <signal.h>
#include <stdlib.h>

#include "filter/filter.h"
#include "model/model.h"
#include "sampler/tune.h"
#include "survey/series.h"

#define T_YEARS 20

static tf_model *model;
static tf_series *series;
static const double theta[3] = {0.5, 400.0, 0.15};   /* ricker: r, K, sigma */

static void setup(void)
{
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new("ricker", "poisson", &model, &err), TF_OK);
    double x[T_YEARS], y[T_YEARS];
    tf_rng rng;
    tf_rng_derive(&rng, 8, NULL, 0);
    ck_assert_int_eq(tf_model_simulate(model, theta, log(300.0), NULL, T_YEARS, &rng, x, y, &err), TF_OK);
    series = tf_series_new("t", 2000, T_YEARS, y, NULL, NULL, &err);
    ck_assert_ptr_nonnull(series);
    ck_assert_int_eq(tf_model_initial_from_series(model, series, &err), TF_OK);
}

static void teardown(void)
{
    tf_series_free(series);
    tf_model_free(model);
}

static double sd_at(size_t n, size_t reps, int correlated, tf_rng *rng)
{
    tf_filter *f = tf_filter_alloc(model, series, n);
    ck_assert_ptr_nonnull(f);
    tf_tune_options o = tf_tune_default_options(correlated);
    o.n_reps = reps;
    double *zm = malloc(2 * tf_filter_n_move(f) * sizeof(double));
    double *zp = malloc(2 * tf_filter_n_pick(f) * sizeof(double));
    double sd, mean;
    tf_tune_measure(f, theta, &o, rng, zm, zp, &sd, &mean);
    ck_assert(isfinite(mean));
    free(zm);
    free(zp);
    tf_filter_free(f);
    return sd;
}

/* The SD of the log-likelihood estimate falls like 1/sqrt(N) (Berard, Del Moral & Doucet 2014,
 * Electronic Journal of Probability 19(94), Theorem 1.1: asymptotically normal with variance
 * proportional to 1/N), so four times the particles halve it. The estimates have a heavy lower
 * tail, which makes a sample SD noisier than for normal data: over 1000 repetitions at 800 and
 * 3200 particles, repeated runs of this check gave ratios between 1.9 and 2.2, and below a few
 * hundred particles the SD falls faster than the asymptote says. The band 1.6 .. 2.5 leaves room
 * for that and still fails for a wrong scaling (1/N would give 4, no gain 1). */
START_TEST(spread_halves_with_four_times_the_particles)
{
    tf_rng rng;
    tf_rng_derive(&rng, 1, NULL, 0);
    double a = sd_at(800, 1000, 0, &rng), b = sd_at(3200, 1000, 0, &rng);
    ck_assert_msg(a / b > 1.6 && a / b < 2.5, "sd %g at 800, %g at 3200", a, b);
}
END_TEST

/* The point of the correlated method: with rho = 0.99 two successive estimates differ far less
 * than two independent ones, whose difference has SD sqrt(2) sd (Deligiannidis, Doucet & Pitt
 * 2018, section 3). Requiring less than 0.8 of that is a loose bound for rho = 0.99. */
START_TEST(correlated_estimates_differ_less)
{
    tf_rng rng;
    tf_rng_derive(&rng, 2, NULL, 0);
    double sd = sd_at(100, 200, 0, &rng), ratio_sd = sd_at(100, 200, 1, &rng);
    ck_assert_msg(ratio_sd < 0.8 * sqrt(2.0) * sd, "log-ratio sd %g, estimate sd %g", ratio_sd, sd);
}
END_TEST

START_TEST(tuning_reaches_the_target)
{
    tf_rng rng;
    tf_rng_derive(&rng, 3, NULL, 0);
    tf_tune_options o = tf_tune_default_options(0);
    /* The bootstrap filter, for which 10 particles are too few here (the guided filter's 10 reach
     * the target at once, and the search logic would not be exercised). */
    o.proposal = TF_PROPOSAL_BOOTSTRAP;
    o.min_particles = 10;
    o.start_particles = 10;
    double points[2 * 3] = {theta[0], theta[1], theta[2], 0.8, 350.0, 0.1};
    tf_tune_result r;
    ck_assert_int_eq(tf_tune_particles(model, series, points, 2, &o, &rng, &r, NULL), TF_OK);
    ck_assert(r.reached);
    ck_assert(r.sd <= 1.15 * o.target_sd);
    ck_assert_uint_ge(r.n_particles, o.min_particles);
    ck_assert(isfinite(r.sd_first) && isfinite(r.mean_loglik));
    ck_assert_uint_ge(r.n_rounds, 2);   /* 10 particles are too few for a 20-year series */
    /* A fixed count: one measurement there. */
    o.start_particles = o.min_particles = o.max_particles = 64;
    o.max_rounds = 1;
    ck_assert_int_eq(tf_tune_particles(model, series, points, 2, &o, &rng, &r, NULL), TF_OK);
    ck_assert_uint_eq(r.n_particles, 64);
    ck_assert_uint_eq(r.n_rounds, 1);
}
END_TEST

/* Once a count has reached the target only a smaller one can replace it, so the search must not
 * spend a round at or above it. Here (correlated, target 4, stream seed 3) 100 particles reach
 * the target with a spread near 1 and the extrapolated 8 spread about 16, far more than
 * 1/sqrt(N) predicts, so the extrapolation from 8 asks for about 140. The third and last round
 * must go between 8 and 100 instead (the log-scale midpoint, 29, whose spread is about 2.3) and
 * so find a smaller count that reaches the target; measuring at 140 would leave 100. */
START_TEST(tuning_never_measures_above_a_count_that_reached)
{
    tf_rng rng;
    tf_rng_derive(&rng, 3, NULL, 0);
    tf_tune_options o = tf_tune_default_options(1);
    /* The spreads above are the bootstrap filter's; the guided one reaches target 4 at 8. */
    o.proposal = TF_PROPOSAL_BOOTSTRAP;
    o.start_particles = 100;
    o.min_particles = 8;
    o.target_sd = 4.0;
    o.max_rounds = 3;
    double points[2 * 3] = {theta[0], theta[1], theta[2], 0.8, 350.0, 0.1};
    tf_tune_result r;
    ck_assert_int_eq(tf_tune_particles(model, series, points, 2, &o, &rng, &r, NULL), TF_OK);
    ck_assert_uint_eq(r.n_rounds, 3);
    ck_assert(r.reached);
    ck_assert_msg(r.n_particles > 8 && r.n_particles < 100, "chose %zu", r.n_particles);
}
END_TEST

START_TEST(bad_options_and_stop)
{
    tf_rng rng;
    tf_rng_derive(&rng, 4, NULL, 0);
    tf_tune_result r;
    tf_tune_options o = tf_tune_default_options(0);
    o.n_reps = 2;
    ck_assert_int_eq(tf_tune_particles(model, series, theta, 1, &o, &rng, &r, NULL), TF_ERR_INVALID);
    o = tf_tune_default_options(0);
    ck_assert_int_eq(tf_tune_particles(model, series, theta, 0, &o, &rng, &r, NULL), TF_ERR_INVALID);
    o.min_particles = 500;
    o.max_particles = 100;
    ck_assert_int_eq(tf_tune_particles(model, series, theta, 1, &o, &rng, &r, NULL), TF_ERR_INVALID);
    static volatile sig_atomic_t stop = 1;
    o = tf_tune_default_options(1);
    o.stop = &stop;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_tune_particles(model, series, theta, 1, &o, &rng, &r, &err), TF_ERR_INTERRUPTED);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("tune");
    TCase *tc = tcase_create("particles");
    tcase_add_checked_fixture(tc, setup, teardown);
    tcase_set_timeout(tc, 60);
    TF_ADD_STATISTICAL_TEST(tc, spread_halves_with_four_times_the_particles);
    tcase_add_test(tc, correlated_estimates_differ_less);
    tcase_add_test(tc, tuning_reaches_the_target);
    tcase_add_test(tc, tuning_never_measures_above_a_count_that_reached);
    tcase_add_test(tc, bad_options_and_stop);
    suite_add_tcase(s, tc);
    return s;
}
