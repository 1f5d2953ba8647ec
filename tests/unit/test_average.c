/* Unit tests for the weighted quantiles and moments of pooled draws (analysis/average.c). The
 * expected values are worked by hand from the definition in average.h; for equal weights it is
 * definition 5 of Hyndman & Fan (1996, The American Statistician 50:361), Q(p) = x_(k) +
 * (np + 1/2 - k)(x_(k+1) - x_(k)) with k = floor(np + 1/2). */
#include "tf_test.h"

#include <math.h>

#include "analysis/average.h"

#define TOL 1e-12

START_TEST(equal_weights)
{
    /* Unsorted on purpose: the function sorts. */
    tf_average_point pts[] = {{3, 1}, {1, 1}, {4, 1}, {2, 1}};
    double p[] = {0, 0.1, 0.125, 0.25, 0.5, 0.8, 0.875, 1};
    double q[8];
    ck_assert_int_eq(tf_average_quantiles(pts, 4, p, 8, q), 1);
    /* n = 4: np + 1/2 = 2.5 at p = 0.5 -> between x(2) = 2 and x(3) = 3, halfway. */
    double want[] = {1, 1, 1, 1.5, 2.5, 3.7, 4, 4};
    for (int i = 0; i < 8; i++)
        ck_assert_msg(fabs(q[i] - want[i]) < TOL, "p = %g: %.15g, want %g", p[i], q[i], want[i]);
    ck_assert(pts[0].value == 1 && pts[3].value == 4);
}
END_TEST

START_TEST(weights_scale_free)
{
    /* Multiplying every weight by a constant changes nothing. */
    tf_average_point a[] = {{1, 0.2}, {2, 0.2}, {3, 0.2}, {4, 0.2}};
    tf_average_point b[] = {{1, 5}, {2, 5}, {3, 5}, {4, 5}};
    double p[] = {0.3, 0.5, 0.9}, qa[3], qb[3];
    tf_average_quantiles(a, 4, p, 3, qa);
    tf_average_quantiles(b, 4, p, 3, qb);
    for (int i = 0; i < 3; i++)
        ck_assert(fabs(qa[i] - qb[i]) < TOL);
}
END_TEST

START_TEST(unequal_weights)
{
    /* Weights 1, 3 on values 0, 10: midpoints at 1/8 and 5/8. The median lies 3/8 of the way
     * from 1/8 to 5/8: 10 * (0.5 - 0.125) / 0.5 = 7.5. */
    tf_average_point pts[] = {{10, 3}, {0, 1}};
    double p[] = {0.5, 0.1, 0.7}, q[3];
    ck_assert_int_eq(tf_average_quantiles(pts, 2, p, 3, q), 1);
    ck_assert(fabs(q[0] - 7.5) < TOL);
    ck_assert(fabs(q[1] - 0) < TOL);
    ck_assert(fabs(q[2] - 10) < TOL);
    /* A zero weight is ignored: the same as without the point. */
    tf_average_point with_zero[] = {{10, 3}, {-100, 0}, {0, 1}, {100, 0}};
    double q2[3];
    tf_average_quantiles(with_zero, 4, p, 3, q2);
    for (int i = 0; i < 3; i++)
        ck_assert(fabs(q[i] - q2[i]) < TOL);
}
END_TEST

START_TEST(mixture_of_two_models)
{
    /* Two models of two draws each, probabilities 0.75 and 0.25: each draw of the first weighs
     * 0.375, of the second 0.125. Sorted: 1 (0.375), 2 (0.375), 5 (0.125), 6 (0.125); midpoints
     * 0.1875, 0.5625, 0.8125, 0.9375. Median between 1 and 2: 1 + (0.5 - 0.1875) / 0.375. */
    tf_average_point pts[] = {{5, 0.125}, {1, 0.375}, {6, 0.125}, {2, 0.375}};
    double p[] = {0.5, 0.9}, q[2];
    tf_average_quantiles(pts, 4, p, 2, q);
    ck_assert(fabs(q[0] - (1 + 0.3125 / 0.375)) < TOL);
    ck_assert(fabs(q[1] - (5 + (0.9 - 0.8125) / 0.125)) < TOL);
    double mean, neg;
    tf_average_point m[] = {{-1, 0.375}, {2, 0.375}, {5, 0.125}, {-6, 0.125}};
    tf_average_moments(m, 4, &mean, &neg);
    ck_assert(fabs(mean - (-0.375 + 0.75 + 0.625 - 0.75)) < TOL);
    ck_assert(fabs(neg - 0.5) < TOL);
}
END_TEST

START_TEST(no_weight)
{
    tf_average_point pts[] = {{1, 0}, {2, 0}};
    double p[] = {0.5}, q[1], mean, neg;
    ck_assert_int_eq(tf_average_quantiles(pts, 2, p, 1, q), 0);
    ck_assert(isnan(q[0]));
    ck_assert_int_eq(tf_average_quantiles(pts, 0, p, 1, q), 0);
    tf_average_moments(pts, 2, &mean, &neg);
    ck_assert(isnan(mean) && isnan(neg));
    /* One point: every quantile is its value. */
    tf_average_point one[] = {{7, 2}};
    double ps[] = {0, 0.5, 1}, qs[3];
    ck_assert_int_eq(tf_average_quantiles(one, 1, ps, 3, qs), 1);
    ck_assert(qs[0] == 7 && qs[1] == 7 && qs[2] == 7);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("average");
    TCase *tc = tcase_create("average");
    tcase_add_test(tc, equal_weights);
    tcase_add_test(tc, weights_scale_free);
    tcase_add_test(tc, unequal_weights);
    tcase_add_test(tc, mixture_of_two_models);
    tcase_add_test(tc, no_weight);
    suite_add_tcase(s, tc);
    return s;
}
