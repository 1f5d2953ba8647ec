/* Student-t mixtures: densities against GSL's univariate t and the F law of the Mahalanobis
 * distance, draws against their moments, and the weighted moments. */
#include "tf_test.h"

#include <math.h>
#include <stdlib.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>

#include "compare/tmix.h"

/* 1-d: t_nu(m, s^2) density = gsl_ran_tdist_pdf((z - m) / s, nu) / s. */
START_TEST(one_dimension_matches_gsl)
{
    tf_tmix q;
    ck_assert_int_eq(tf_tmix_init(&q, 1, NULL), TF_OK);
    double m = 1.5, var = 0.49;
    ck_assert_int_eq(tf_tmix_add(&q, 1.0, 5.0, &m, &var, 1.0, NULL), TF_OK);
    ck_assert_int_eq(tf_tmix_check(&q, NULL), TF_OK);
    for (double z = -10; z <= 10; z += 0.37) {
        double want = log(gsl_ran_tdist_pdf((z - m) / 0.7, 5.0) / 0.7);
        ck_assert_msg(fabs(tf_tmix_log_density(&q, &z) - want) < 1e-12, "z=%g", z);
    }
    /* A mixture is the weighted sum of its components' densities. */
    tf_tmix r;
    tf_tmix_init(&r, 1, NULL);
    double m2 = -2.0;
    tf_tmix_add(&r, 0.7, 5.0, &m, &var, 1.0, NULL);
    tf_tmix_add(&r, 0.3, 2.5, &m2, &var, 4.0, NULL);
    ck_assert_int_eq(tf_tmix_check(&r, NULL), TF_OK);
    for (double z = -8; z <= 8; z += 0.5) {
        double want = 0.7 * gsl_ran_tdist_pdf((z - m) / 0.7, 5.0) / 0.7 +
                      0.3 * gsl_ran_tdist_pdf((z - m2) / 1.4, 2.5) / 1.4;
        ck_assert(fabs(tf_tmix_log_density(&r, &z) - log(want)) < 1e-12);
    }
}
END_TEST

/* Draws in 3-d: for t_nu(m, S) the Mahalanobis distance delta / d follows F(d, nu) (Kotz &
 * Nadarajah 2004, chapter 1; recalled from memory), checked by a Kolmogorov-Smirnov distance
 * below 1.63 / sqrt(n) (the 1 % point of Kolmogorov's law); the mean within 5 standard errors
 * and the covariance nu / (nu - 2) S within 10 % (nu = 6: the fourth moment is finite, so the
 * sample covariance's relative error is about 0.02 at n = 40000). The density itself: the mean of p / q over draws from q, for a normal
 * density p, is 1 within 5 standard errors. */
static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

START_TEST(draws_follow_the_density)
{
    enum { N = 40000, D = 3 };
    double m[D] = {1.0, -2.0, 0.5};
    double S[D * D] = {1.0, 0.3, -0.2, 0.3, 0.5, 0.1, -0.2, 0.1, 2.0};
    const double nu = 6.0;
    tf_tmix q;
    tf_tmix_init(&q, D, NULL);
    ck_assert_int_eq(tf_tmix_add(&q, 1.0, nu, m, S, 1.0, NULL), TF_OK);
    static double z[N * D], dist[N], w[N];
    tf_rng rng;
    uint64_t key = 1;
    tf_rng_derive(&rng, 2026, &key, 1);
    /* S^-1 for the distance by the adjugate, independent of the Cholesky code under test. */
    double a = S[0], b = S[1], c = S[2], e = S[4], f = S[5], i9 = S[8];
    double det = a * (e * i9 - f * f) - b * (b * i9 - f * c) + c * (b * f - e * c);
    double inv[D * D] = {(e * i9 - f * f) / det, (c * f - b * i9) / det, (b * f - c * e) / det,
                         (c * f - b * i9) / det, (a * i9 - c * c) / det, (b * c - a * f) / det,
                         (b * f - c * e) / det, (b * c - a * f) / det, (a * e - b * b) / det};
    double sum[D] = {0}, cov[D * D] = {0}, ratio = 0, ratio2 = 0;
    for (size_t k = 0; k < N; k++) {
        double *x = z + k * D;
        tf_tmix_draw(&q, &rng, x);
        double d = 0;
        for (int i = 0; i < D; i++)
            for (int j = 0; j < D; j++)
                d += (x[i] - m[i]) * inv[i * D + j] * (x[j] - m[j]);
        dist[k] = d / D;
        for (int i = 0; i < D; i++)
            sum[i] += x[i];
        /* p = product of normals N(m_i, 1.5^2): wider than q in no direction by much, so the
         * ratio has finite variance. */
        double lp = 0;
        for (int i = 0; i < D; i++)
            lp += -0.5 * log(2 * 3.14159265358979323846 * 2.25) - 0.5 * (x[i] - m[i]) * (x[i] - m[i]) / 2.25;
        double r = exp(lp - tf_tmix_log_density(&q, x));
        ratio += r;
        ratio2 += r * r;
        w[k] = 1.0;
    }
    qsort(dist, N, sizeof *dist, cmp);
    double ks = 0;
    for (size_t k = 0; k < N; k++) {
        double F = gsl_cdf_fdist_P(dist[k], D, nu);
        double d1 = fabs(F - (double)k / N), d2 = fabs(F - (double)(k + 1) / N);
        ks = fmax(ks, fmax(d1, d2));
    }
    ck_assert_msg(ks < 1.63 / sqrt((double)N), "KS %g", ks);
    for (int i = 0; i < D; i++) {
        double se = sqrt(nu / (nu - 2) * S[i * D + i] / N);
        ck_assert_msg(fabs(sum[i] / N - m[i]) < 5 * se, "mean %d", i);
    }
    double mean[D];
    double ess = tf_tmix_weighted_moments(z, w, N, D, mean, cov);
    ck_assert(fabs(ess - N) < 1e-6 * N);
    for (int i = 0; i < D; i++)
        for (int j = 0; j < D; j++) {
            double want = nu / (nu - 2) * S[i * D + j];
            ck_assert_msg(fabs(cov[i * D + j] - want) < 0.1 * sqrt(want * want + 0.1), "cov %d %d: %g vs %g", i, j,
                          cov[i * D + j], want);
        }
    double mr = ratio / N, ser = sqrt((ratio2 / N - mr * mr) / N);
    ck_assert_msg(fabs(mr - 1.0) < 5 * ser, "mean p/q %g (se %g)", mr, ser);
}
END_TEST

START_TEST(weighted_moments_by_hand)
{
    double z[] = {0, 0, 2, 0, 0, 4};
    double w[] = {1, 1, 2}, mean[2], cov[4];
    double ess = tf_tmix_weighted_moments(z, w, 3, 2, mean, cov);
    /* Normalised weights 1/4, 1/4, 1/2: mean (0.5, 2); cov by hand. */
    ck_assert(fabs(ess - 16.0 / 6.0) < 1e-12);
    ck_assert(fabs(mean[0] - 0.5) < 1e-12 && fabs(mean[1] - 2.0) < 1e-12);
    ck_assert(fabs(cov[0] - (0.25 * 0.25 + 0.25 * 1.5 * 1.5 + 0.5 * 0.25)) < 1e-12);
    ck_assert(fabs(cov[3] - (0.25 * 4 + 0.25 * 4 + 0.5 * 4)) < 1e-12);
    ck_assert(fabs(cov[1] - cov[2]) < 1e-15);
    ck_assert(fabs(cov[1] - (0.25 * (-0.5) * (-2) + 0.25 * 1.5 * (-2) + 0.5 * (-0.5) * 2)) < 1e-12);
    double zero[3] = {0, 0, 0};
    mean[0] = 7;
    ck_assert(tf_tmix_weighted_moments(z, zero, 3, 2, mean, cov) == 0 && mean[0] == 7);
}
END_TEST

START_TEST(bad_components_are_refused)
{
    gsl_set_error_handler_off(); /* as main does */
    tf_tmix q;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_tmix_init(&q, 0, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_tmix_init(&q, TF_TMIX_MAX_DIM + 1, &err), TF_ERR_INVALID);
    tf_tmix_init(&q, 2, NULL);
    double m[2] = {0, 0}, singular[4] = {1, 1, 1, 1}, good[4] = {1, 0, 0, 1};
    ck_assert_int_eq(tf_tmix_add(&q, 1.0, 5.0, m, singular, 1.0, &err), TF_ERR_NUMERIC);
    ck_assert_int_eq(tf_tmix_add(&q, 0.0, 5.0, m, good, 1.0, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_tmix_add(&q, 0.5, -1.0, m, good, 1.0, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_tmix_add(&q, 0.5, 5.0, m, good, 0.0, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(q.n_comp, 0);
    ck_assert_int_eq(tf_tmix_check(&q, &err), TF_ERR_INVALID);
    tf_tmix_add(&q, 0.5, 5.0, m, good, 1.0, NULL);
    ck_assert_int_eq(tf_tmix_check(&q, &err), TF_ERR_INVALID);
    for (int c = 1; c < TF_TMIX_MAX_COMP; c++)
        ck_assert_int_eq(tf_tmix_add(&q, 0.1, 5.0, m, good, 1.0, NULL), TF_OK);
    ck_assert_int_eq(tf_tmix_add(&q, 0.1, 5.0, m, good, 1.0, &err), TF_ERR_INVALID);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("tmix");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, one_dimension_matches_gsl);
    tcase_add_test(tc, draws_follow_the_density);
    tcase_add_test(tc, weighted_moments_by_hand);
    tcase_add_test(tc, bad_components_are_refused);
    suite_add_tcase(s, tc);
    return s;
}
