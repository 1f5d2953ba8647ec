/* The rounded log-normal count model: its probabilities against scipy, the vector kernel against
 * the scalar function, normalisation, its draws, and its agreement with the continuous density
 * for large counts. */
#include "tf_test.h"

#include <float.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_rng.h>

#include "model/model.h"
#include "util/rng.h"

static const tf_obs_type *obs(void)
{
    const tf_obs_type *o = tf_model_find_obs("lognormal-int");
    ck_assert_ptr_nonnull(o);
    return o;
}

START_TEST(row_describes_a_count_model)
{
    const tf_obs_type *o = obs();
    ck_assert_int_eq(o->needs_integer, 1);
    ck_assert_int_eq(o->needs_positive, 0);
    ck_assert_uint_eq(o->n_params, 1);
    ck_assert_str_eq(o->param_names[0], "tau");
    /* It shares tau with the continuous log-normal, so the same prior applies. */
    ck_assert_str_eq(tf_model_find_obs("lognormal")->param_names[0], "tau");
}
END_TEST

/* tests/data/obs_lognormal_int.csv: log P from scipy.special.log_ndtr (see
 * tests/ref/test_obs_lognormal_int.py). Agreement within 1e-9 absolute plus 1e-12 relative:
 * both sides form a difference of two distribution-function values, which loses about
 * eps / (interval width in sd units) relative; the narrowest interval on the grid is 8e-5 sd
 * wide (y = 250000, tau = 0.05), so about 3e-12. -inf must match exactly. */
START_TEST(probabilities_match_scipy)
{
    FILE *f = fopen(TF_TEST_DATA("obs_lognormal_int.csv"), "r");
    ck_assert_msg(f != NULL, "cannot open tests/data/obs_lognormal_int.csv");
    const tf_obs_type *o = obs();
    char line[256];
    size_t n = 0;
    while (fgets(line, sizeof line, f)) {
        if (line[0] == '#' || !strncmp(line, "tau,", 4))
            continue;
        double tau, y, mu, want;
        ck_assert_int_eq(sscanf(line, "%lf,%lf,%lf,%lf", &tau, &y, &mu, &want), 4);
        double p[1] = {tau}, tol = 1e-9 + 1e-12 * fabs(want);
        double got = o->logpmf(p, y, mu);
        ck_assert_msg(fabs(got - want) <= tol, "tau=%g y=%g mu=%g: got %.17g, scipy %.17g", tau, y, mu, got, want);
        /* The kernel at two efforts, mu = effort exp(x), in a vector longer than one SIMD pass. */
        static const double efforts[] = {1.0, 0.3};
        for (int k = 0; k < 2; k++) {
            enum { N = 19 };
            double x[N], lw[N], c[TF_OBS_MAX_CONST], le = log(efforts[k]);
            for (int j = 0; j < N; j++) {
                x[j] = log(mu) - le;
                lw[j] = j;
            }
            o->year_const(p, y, c);
            o->add_logweight(p, y, le, c, x, lw, N);
            for (int j = 0; j < N; j++)
                ck_assert_msg(fabs((lw[j] - j) - want) <= tol + 1e-12 * fabs(want) * j, "kernel tau=%g y=%g mu=%g",
                              tau, y, mu);
        }
        n++;
    }
    fclose(f);
    ck_assert_uint_eq(n, 144);
}
END_TEST

/* Kernel and scalar function agree over a spread of states, including extinct particles
 * (x = -inf: a zero count is then certain, any other impossible). */
START_TEST(kernel_equals_scalar_and_handles_extinction)
{
    const tf_obs_type *o = obs();
    enum { N = 201 };
    double x[N], lw[N], c[TF_OBS_MAX_CONST], p[1] = {0.35};
    static const double ys[] = {0, 1, 4, 300};
    for (size_t yi = 0; yi < 4; yi++) {
        double y = ys[yi], le = log(2.0);
        for (int i = 0; i < N; i++) {
            x[i] = i == 0 ? -INFINITY : -10.0 + 25.0 * i / N;
            lw[i] = 0;
        }
        o->year_const(p, y, c);
        o->add_logweight(p, y, le, c, x, lw, N);
        ck_assert(lw[0] == (y == 0 ? 0.0 : -INFINITY));
        for (int i = 1; i < N; i++) {
            double want = o->logpmf(p, y, exp(x[i] + le));
            ck_assert_msg(lw[i] == want || fabs(lw[i] - want) <= 1e-12 * (1 + fabs(want)), "y=%g x=%g: %.17g vs %.17g",
                          y, x[i], lw[i], want);
            ck_assert(!isnan(lw[i]));
        }
    }
}
END_TEST

/* The kernel's series for narrow intervals against the exact difference (logpmf) on both sides
 * of its switch-over, |m| = 0.2 / w in sd units, for widths w just under and over its limit 0.1
 * (y = 11 and y = 9 at tau = 1) and a narrow one (y = 400, tau = 0.05). */
START_TEST(series_matches_exact_difference)
{
    const tf_obs_type *o = obs();
    static const double cases[][2] = {{11, 1.0}, {9, 1.0}, {400, 0.05}, {40, 0.3}};
    enum { N = 401 };
    double x[N], lw[N], c[TF_OBS_MAX_CONST];
    for (int k = 0; k < 4; k++) {
        double y = cases[k][0], p[1] = {cases[k][1]};
        o->year_const(p, y, c);
        double w = c[3], mid = 0.5 * (c[0] + c[1]);
        for (int i = 0; i < N; i++) {
            /* m from -3 to 3 times the switch-over point (or +-6 sd when the series is off). */
            double span = w <= 0.1 ? 3 * 0.2 / w : 6;
            x[i] = mid - p[0] * span * (2.0 * i / (N - 1) - 1.0);
            lw[i] = 0;
        }
        o->add_logweight(p, y, 0.0, c, x, lw, N);
        for (int i = 0; i < N; i++) {
            double want = o->logpmf(p, y, exp(x[i]));
            /* The series' first omitted term is under 3e-14 relative; the exact difference of
             * two close distribution values loses eps / (w P) relative, 2e-15 / w here. */
            double tol = 1e-13 * (1 + fabs(want)) + 4e-15 / w;
            ck_assert_msg(fabs(lw[i] - want) <= tol, "y=%g tau=%g x=%.17g: kernel %.17g exact %.17g", y, p[0], x[i],
                          lw[i], want);
        }
    }
}
END_TEST

/* The probabilities telescope to F(inf) - F(0) = 1 (a property of the definition). */
START_TEST(probabilities_sum_to_one)
{
    const tf_obs_type *o = obs();
    static const double cases[][2] = {{0.05, 3.0}, {0.4, 12.0}, {1.5, 0.2}, {0.2, 900.0}};
    for (int k = 0; k < 4; k++) {
        double p[1] = {cases[k][0]}, mu = cases[k][1], s = 0;
        for (double y = 0; y < 200000; y++)
            s += exp(o->logpmf(p, y, mu));
        /* The mass beyond 2e5 is below 1e-13 in every case (Y's upper tail at >= 5 sd). */
        ck_assert_msg(fabs(s - 1.0) < 1e-11, "tau=%g mu=%g: sum %.15g", p[0], mu, s);
    }
}
END_TEST

/* Far from the rounding scale (y large, tau fixed) the probability of the unit interval is the
 * continuous density times 1, up to the midpoint rule's error (width^2 f''/24, relative
 * O(1 / (y tau)^2)): within 1e-3 relative at y = 1000, tau = 0.3. */
START_TEST(large_counts_approach_the_continuous_density)
{
    const tf_obs_type *oi = obs(), *oc = tf_model_find_obs("lognormal");
    double p[1] = {0.3};
    for (double y = 900; y <= 1100; y += 50) {
        double a = oi->logpmf(p, y, 1000.0), b = oc->logpmf(p, y, 1000.0);
        ck_assert_msg(fabs(a - b) < 1e-3, "y=%g: %.10g vs %.10g", y, a, b);
    }
    /* And they differ where rounding matters: a count of 1 with mean 1. */
    ck_assert(fabs(oi->logpmf(p, 1, 1.0) - oc->logpmf(p, 1, 1.0)) > 0.01);
}
END_TEST

/* Draws are whole numbers whose frequencies follow the probabilities: Pearson's chi-square over
 * the cells 0..K-1 and a pooled tail, against the 99.9 % point of its chi-square law
 * (Pearson 1900; gsl_cdf_chisq_Qinv), so a correct sampler fails one run in 1000 at this seed. */
START_TEST(draws_follow_the_probabilities)
{
    const tf_obs_type *o = obs();
    double p[1] = {0.6}, mu = 4.0;
    enum { K = 15, N = 200000 };
    double counts[K + 1] = {0};
    tf_rng rng;
    uint64_t key = 7;
    tf_rng_derive(&rng, 99, &key, 1);
    gsl_rng g;
    tf_rng_gsl_view(&rng, &g);
    for (int i = 0; i < N; i++) {
        double y = o->draw(p, mu, &g);
        ck_assert(y >= 0 && y == floor(y));
        counts[y < K ? (int)y : K]++;
    }
    double chi2 = 0, tail = 1;
    for (int k = 0; k <= K; k++) {
        double pk = k < K ? exp(o->logpmf(p, k, mu)) : tail;
        if (k < K)
            tail -= pk;
        double e = N * pk;
        chi2 += (counts[k] - e) * (counts[k] - e) / e;
    }
    ck_assert_msg(chi2 < gsl_cdf_chisq_Qinv(1e-3, K), "chi2 %g", chi2);
    ck_assert(o->draw(p, 0.0, &g) == 0.0);
}
END_TEST

/* The joined model accepts zero counts under it, unlike the continuous log-normal. */
START_TEST(joined_model_simulates_whole_counts)
{
    tf_model *m = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new("ricker", "lognormal-int", &m, &err), TF_OK);
    ck_assert_str_eq(tf_model_name(m), "ricker+lognormal-int");
    double theta[4] = {0.5, 1.0, 0.5, 0.8}, x[30], y[30];
    tf_rng rng;
    uint64_t key = 3;
    tf_rng_derive(&rng, 5, &key, 1);
    ck_assert_int_eq(tf_model_simulate(m, theta, 0.0, NULL, 30, &rng, x, y, &err), TF_OK);
    int zeros = 0;
    for (int t = 0; t < 30; t++) {
        ck_assert(y[t] == floor(y[t]) && y[t] >= 0);
        zeros += y[t] == 0;
    }
    ck_assert_int_gt(zeros, 0);
    tf_model_free(m);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("obs_lognormal_int");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, row_describes_a_count_model);
    tcase_add_test(tc, probabilities_match_scipy);
    tcase_add_test(tc, kernel_equals_scalar_and_handles_extinction);
    tcase_add_test(tc, series_matches_exact_difference);
    tcase_add_test(tc, probabilities_sum_to_one);
    tcase_add_test(tc, large_counts_approach_the_continuous_density);
    tcase_add_test(tc, draws_follow_the_probabilities);
    tcase_add_test(tc, joined_model_simulates_whole_counts);
    suite_add_tcase(s, tc);
    return s;
}
