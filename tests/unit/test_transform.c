/* Unit tests of the transforms to the unconstrained scale, above all of their Jacobians. */
#include "tf_test.h"

#include <float.h>
#include <math.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>

#include "model/prior.h"
#include "sampler/transform.h"

static tf_transform make_t(double lo, double hi)
{
    tf_transform t;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_transform_init(&t, lo, hi, &err), TF_OK);
    return t;
}

static tf_prior make_p(tf_prior_kind kind, double a, double b, double c, double lo, double hi)
{
    double par[3] = {a, b, c};
    tf_prior p;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_prior_init(&p, kind, par, lo, hi, &err), TF_OK);
    return p;
}

START_TEST(kinds_follow_the_support)
{
    ck_assert_int_eq(make_t(-INFINITY, INFINITY).kind, TF_TRANSFORM_IDENTITY);
    ck_assert_int_eq(make_t(0, INFINITY).kind, TF_TRANSFORM_LOWER);
    ck_assert_int_eq(make_t(-INFINITY, 3).kind, TF_TRANSFORM_UPPER);
    ck_assert_int_eq(make_t(-1, 3).kind, TF_TRANSFORM_INTERVAL);
    const double bad[][2] = {{1, 1}, {2, 1}, {NAN, 1}, {0, NAN}, {INFINITY, INFINITY}, {-INFINITY, -INFINITY}};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        tf_error err;
        tf_error_init(&err);
        tf_transform t;
        ck_assert_int_eq(tf_transform_init(&t, bad[i][0], bad[i][1], &err), TF_ERR_INVALID);
        ck_assert_uint_eq(err.n_items, 1);
    }
}
END_TEST

START_TEST(forward_and_inverse_agree)
{
    const tf_transform ts[] = {make_t(-INFINITY, INFINITY), make_t(0, INFINITY), make_t(2, INFINITY),
                               make_t(-INFINITY, 3), make_t(-1, 3), make_t(0, 1e-3)};
    const double us[] = {-30, -5, -0.3, 0, 0.7, 4, 30};
    for (size_t i = 0; i < sizeof ts / sizeof ts[0]; i++)
        for (size_t k = 0; k < sizeof us / sizeof us[0]; k++) {
            double x = tf_transform_inverse(&ts[i], us[k]);
            ck_assert_msg(x >= ts[i].lower && x <= ts[i].upper, "transform %zu: x(%g) = %g", i, us[k], x);
            double u = tf_transform_forward(&ts[i], x);
            /* x itself is stored to within half a spacing of doubles at its magnitude (or at the
             * support's ends, from which x - a and b - x are measured); through dx/du that is
             * an error in u of spacing / |dx/du|. Four spacings, plus 1e-12 for exp and log. */
            double mag = fabs(x);
            if (isfinite(ts[i].lower))
                mag = fmax(mag, fabs(ts[i].lower));
            if (isfinite(ts[i].upper))
                mag = fmax(mag, fabs(ts[i].upper));
            double tol = 1e-12 * fmax(1, fabs(us[k])) +
                         4 * DBL_EPSILON * mag / exp(tf_transform_log_jacobian(&ts[i], us[k]));
            ck_assert_msg(fabs(u - us[k]) < tol, "transform %zu: u(x(%g)) = %.15g", i, us[k], u);
        }
    /* Ends and outside. */
    tf_transform t = make_t(-1, 3);
    ck_assert(tf_transform_forward(&t, -1) == -INFINITY);
    ck_assert(tf_transform_forward(&t, 3) == INFINITY);
    ck_assert(isnan(tf_transform_forward(&t, 3.5)));
    t = make_t(0, INFINITY);
    ck_assert(tf_transform_forward(&t, 0) == -INFINITY);
    ck_assert(isnan(tf_transform_forward(&t, -1)));
    t = make_t(-INFINITY, 3);
    ck_assert(isnan(tf_transform_forward(&t, 4)));
    ck_assert(tf_transform_inverse(&t, 0) == 2); /* 3 - e^0 */
    /* Far out, the inverse stays inside the support and the Jacobian stays finite. */
    t = make_t(-1, 3);
    for (double u = -800; u <= 800; u += 400) {
        double x = tf_transform_inverse(&t, u);
        ck_assert(x >= -1 && x <= 3);
        ck_assert(isfinite(tf_transform_log_jacobian(&t, u)));
    }
}
END_TEST

/* log |dx/du| against a central difference of the inverse: step h = 1e-5 has truncation error
 * O(h^2) ~ 1e-10 relative, rounding ~ 1e-16 / h ~ 1e-11; tolerance 1e-7. */
START_TEST(jacobian_matches_numerical_derivative)
{
    const tf_transform ts[] = {make_t(-INFINITY, INFINITY), make_t(0, INFINITY), make_t(-INFINITY, 3),
                               make_t(-1, 3), make_t(10, 10.5)};
    const double us[] = {-6, -1, 0, 0.4, 2.5, 6};
    const double h = 1e-5;
    for (size_t i = 0; i < sizeof ts / sizeof ts[0]; i++)
        for (size_t k = 0; k < sizeof us / sizeof us[0]; k++) {
            double d = (tf_transform_inverse(&ts[i], us[k] + h) - tf_transform_inverse(&ts[i], us[k] - h)) / (2 * h);
            double lj = tf_transform_log_jacobian(&ts[i], us[k]);
            ck_assert_msg(fabs(exp(lj) - fabs(d)) < 1e-7 * fabs(d) + 1e-12, "transform %zu at u=%g: %g vs %g", i,
                          us[k], exp(lj), fabs(d));
        }
}
END_TEST

/* The Jacobian check: the density of u, p(x(u)) |dx/du|, must integrate to 1 over the real line
 * for every prior when the transform is chosen from the prior's own support (change of
 * variables). GSL QAGI on (-inf, inf); requested relative error 1e-9, tolerance 1e-7. */
typedef struct {
    const tf_prior *p;
    const tf_transform *t;
} u_density;

static double density_of_u(double u, void *data)
{
    const u_density *d = data;
    double lp = tf_prior_log_density(d->p, tf_transform_inverse(d->t, u)) + tf_transform_log_jacobian(d->t, u);
    return exp(lp);
}

START_TEST(transformed_densities_integrate_to_one)
{
    const tf_prior cases[] = {
        make_p(TF_PRIOR_NORMAL, 0.5, 0.5, 0, 0, INFINITY),        /* lower end: log */
        make_p(TF_PRIOR_HALFNORMAL, 0.5, 0, 0, -INFINITY, INFINITY),
        make_p(TF_PRIOR_LOGNORMAL, 6.2, 1.5, 0, 1, INFINITY),
        make_p(TF_PRIOR_GAMMA, 0.7, 2, 0, -INFINITY, INFINITY),  /* density unbounded at 0 */
        make_p(TF_PRIOR_GAMMA, 2, 5, 0, 0.1, 2),                 /* interval: logit */
        make_p(TF_PRIOR_UNIFORM, -1, 3, 0, -INFINITY, INFINITY),
        make_p(TF_PRIOR_NORMAL, 0, 1, 0, -1, 2.5),
        make_p(TF_PRIOR_NORMAL, 0, 1, 0, -INFINITY, 2),          /* upper end: log(b - x) */
        make_p(TF_PRIOR_STUDENT_T, 1, 2, 3, -INFINITY, INFINITY), /* identity */
        make_p(TF_PRIOR_STUDENT_T, 0, 1, 1, -INFINITY, 0),
    };
    gsl_integration_workspace *ws = gsl_integration_workspace_alloc(2000);
    ck_assert_ptr_nonnull(ws);
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tf_transform t = make_t(cases[i].lower, cases[i].upper);
        u_density d = {&cases[i], &t};
        gsl_function f = {density_of_u, &d};
        double r, abserr;
        int st = gsl_integration_qagi(&f, 0, 1e-9, 2000, ws, &r, &abserr);
        char desc[160];
        tf_prior_describe(&cases[i], desc, sizeof desc);
        ck_assert_msg(st == GSL_SUCCESS, "%s: %s", desc, gsl_strerror(st));
        ck_assert_msg(fabs(r - 1) < 1e-7, "%s: density of u integrates to %.12g", desc, r);
    }
    gsl_integration_workspace_free(ws);
}
END_TEST

START_TEST(vector_helpers)
{
    const tf_transform t[3] = {make_t(-INFINITY, INFINITY), make_t(0, INFINITY), make_t(-1, 3)};
    const double x[3] = {-0.4, 250, 2.2};
    double u[3], back[3];
    tf_transform_to_unconstrained(t, 3, x, u);
    ck_assert_double_eq_tol(u[1], log(250.0), 1e-12);
    double lj = tf_transform_to_natural(t, 3, u, back);
    double want = 0;
    for (int i = 0; i < 3; i++) {
        ck_assert_double_eq_tol(back[i], x[i], 1e-9 * fmax(1, fabs(x[i])));
        want += tf_transform_log_jacobian(&t[i], u[i]);
    }
    ck_assert_double_eq_tol(lj, want, 1e-12);
    /* log(250) for the log part; log((x-a)(b-x)/(b-a)) = log(3.2 * 0.8 / 4) for the logit part. */
    ck_assert_double_eq_tol(lj, log(250.0) + log(3.2 * 0.8 / 4), 1e-9);
}
END_TEST

static Suite *make_suite(void)
{
    gsl_set_error_handler_off();
    Suite *s = suite_create("transform");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, kinds_follow_the_support);
    tcase_add_test(tc, forward_and_inverse_agree);
    tcase_add_test(tc, jacobian_matches_numerical_derivative);
    tcase_add_test(tc, transformed_densities_integrate_to_one);
    tcase_add_test(tc, vector_helpers);
    suite_add_tcase(s, tc);
    return s;
}
