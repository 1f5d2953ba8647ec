/* The generalized Pareto fit (Zhang & Stephens 2009) and the Pareto-k of importance weights. */
#include "tf_test.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "compare/pareto.h"
#include "util/rng.h"

/* tests/data/pareto_gpd.csv (tests/ref/test_pareto_ref.py): scipy.stats.genpareto samples with
 * a numpy Zhang-Stephens estimate and scipy's MLE. */
START_TEST(fit_matches_numpy_and_scipy)
{
    FILE *f = fopen(TF_TEST_DATA("pareto_gpd.csv"), "r");
    ck_assert_msg(f != NULL, "cannot open tests/data/pareto_gpd.csv");
    static char line[65536];
    static double x[4096], work[4096];
    size_t n_cases = 0;
    while (fgets(line, sizeof line, f)) {
        if (line[0] == '#')
            continue;
        char *p = line, *end;
        strtol(p, &end, 10);
        double k_true = strtod(end + 1, &end);
        size_t n = (size_t)strtol(end + 1, &end, 10);
        double k_zs = strtod(end + 1, &end);
        double k_mle = strtod(end + 1, &end);
        ck_assert_uint_le(n, 4096);
        for (size_t i = 0; i < n; i++)
            x[i] = strtod(end + 1, &end);
        double k, sigma;
        tf_pareto_fit(x, n, work, &k, &sigma);
        /* Same formula, same data: only rounding differs (1e-10). */
        ck_assert_msg(fabs(k - k_zs) < 1e-10, "k %.15g vs numpy %.15g", k, k_zs);
        /* An independent estimator of the same k: 5 MLE sds, (1 + k) / sqrt(n) (Smith 1985,
         * recalled from memory), plus the prior's pull 10 |k - 0.5| / (n + 10). */
        double tol = 5 * (1 + fabs(k_true)) / sqrt((double)n) + 10 * fabs(k_true - 0.5) / ((double)n + 10);
        ck_assert_msg(fabs(k - k_mle) < tol, "k %.4f vs scipy MLE %.4f", k, k_mle);
        ck_assert(sigma > 0);
        n_cases++;
    }
    fclose(f);
    ck_assert_uint_eq(n_cases, 5);
}
END_TEST

/* GPD(k, sigma) by inversion: x = sigma (U^-k - 1) / k. */
static void draw_gpd(tf_rng *rng, double k, double sigma, double *x, size_t n)
{
    for (size_t i = 0; i < n; i++) {
        double u = tf_rng_uniform(rng);
        x[i] = k == 0 ? -sigma * log(u) : sigma * (pow(u, -k) - 1.0) / k;
    }
}

/* Recovery of known shapes over 20 samples each: the mean estimate within 4 standard errors of
 * its spread over the samples plus the prior's pull 10 |k - 0.5| / (n + 10) (systematic), and
 * the scale within 15 % on average (its sd is about sqrt(2)(1+k) sigma / sqrt n, under 6 % here;
 * recalled from memory). */
START_TEST(fit_recovers_known_shapes)
{
    enum { N = 1000, REPS = 20 };
    static double x[N], work[N];
    static const double ks[] = {-0.3, 0.0, 0.4, 0.7, 1.0};
    for (int c = 0; c < 5; c++) {
        tf_rng rng;
        uint64_t key = (uint64_t)c;
        tf_rng_derive(&rng, 11, &key, 1);
        double s = 0, s2 = 0, ss = 0;
        for (int r = 0; r < REPS; r++) {
            draw_gpd(&rng, ks[c], 2.0, x, N);
            double k, sigma;
            tf_pareto_fit(x, N, work, &k, &sigma);
            s += k;
            s2 += k * k;
            ss += sigma;
        }
        double mean = s / REPS, sd = sqrt((s2 - REPS * mean * mean) / (REPS - 1));
        double tol = 4 * sd / sqrt((double)REPS) + 10 * fabs(ks[c] - 0.5) / (N + 10.0);
        ck_assert_msg(fabs(mean - ks[c]) < tol, "k=%g: mean estimate %g (tol %g)", ks[c], mean, tol);
        ck_assert_msg(fabs(ss / REPS / 2.0 - 1.0) < 0.15, "k=%g: mean sigma %g", ks[c], ss / REPS);
    }
}
END_TEST

START_TEST(fit_refuses_degenerate_input)
{
    double x[10] = {1, 1, 1, 1, 1, 1, 1, 1, 1, 1}, work[10], k, sigma;
    tf_pareto_fit(x, 4, work, &k, &sigma);
    ck_assert(isnan(k) && isnan(sigma));
    x[3] = -1;
    tf_pareto_fit(x, 10, work, &k, &sigma);
    ck_assert(isnan(k));
    x[3] = NAN;
    tf_pareto_fit(x, 10, work, &k, &sigma);
    ck_assert(isnan(k));
    for (int i = 0; i < 10; i++)
        x[i] = 0;
    tf_pareto_fit(x, 10, work, &k, &sigma);
    ck_assert(isnan(k));
}
END_TEST

START_TEST(tail_size_follows_the_rule)
{
    ck_assert_uint_eq(tf_pareto_tail_size(100), 20);      /* 100/5 = 20 < 30 */
    ck_assert_uint_eq(tf_pareto_tail_size(10000), 300);   /* 3 sqrt(10000) = 300 < 2000 */
    ck_assert_uint_eq(tf_pareto_tail_size(0), 0);
}
END_TEST

/* Weights with a known tail: Pareto weights w = U^(-1/alpha) have k = 1/alpha; bounded weights
 * (uniform) have k = -1 (their exceedances are uniform, a GPD with k = -1). Tolerances: the k
 * of 3 sqrt(S) = 300 tail values has sd about (1 + k) / sqrt(300), 0.1 at k = 0.8; 4 sds. */
START_TEST(weights_tail_index)
{
    enum { S = 10000 };
    static double lw[S];
    tf_rng rng;
    uint64_t key = 42;
    tf_rng_derive(&rng, 3, &key, 1);
    for (size_t i = 0; i < S; i++)
        lw[i] = -log(tf_rng_uniform(&rng)) / 1.25 + 700.0; /* log of U^(-0.8), shifted far up */
    double k, k2;
    size_t m;
    ck_assert_int_eq(tf_pareto_k(lw, S, &k, &m, NULL), TF_OK);
    ck_assert_uint_eq(m, 300);
    ck_assert_msg(fabs(k - 0.8) < 4 * 1.8 / sqrt(300.0), "k %g", k);
    ck_assert(k > TF_PARETO_K_MAX - 0.3);
    /* Scale-free: shifting every log weight changes nothing. */
    for (size_t i = 0; i < S; i++)
        lw[i] -= 1400.0;
    tf_pareto_k(lw, S, &k2, &m, NULL);
    ck_assert(fabs(k - k2) < 1e-9);
    for (size_t i = 0; i < S; i++)
        lw[i] = log(tf_rng_uniform(&rng));
    tf_pareto_k(lw, S, &k, &m, NULL);
    ck_assert_msg(fabs(k + 1.0) < 4 * 0.1 / sqrt(300.0) + 10 * 1.5 / 310.0 + 0.02, "uniform weights k %g", k);
    /* Zero weights (-inf) below the tail are harmless; too few positive ones give NaN. */
    for (size_t i = 0; i < S / 2; i++)
        lw[i] = -INFINITY;
    tf_pareto_k(lw, S, &k, &m, NULL);
    ck_assert(isfinite(k));
    for (size_t i = 0; i < S - 10; i++)
        lw[i] = -INFINITY;
    tf_pareto_k(lw, S, &k, &m, NULL);
    ck_assert(isnan(k));
    tf_pareto_k(lw, 10, &k, &m, NULL);
    ck_assert(isnan(k));
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("pareto");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, fit_matches_numpy_and_scipy);
    tcase_add_test(tc, fit_recovers_known_shapes);
    tcase_add_test(tc, fit_refuses_degenerate_input);
    tcase_add_test(tc, tail_size_follows_the_rule);
    tcase_add_test(tc, weights_tail_index);
    suite_add_tcase(s, tc);
    return s;
}
