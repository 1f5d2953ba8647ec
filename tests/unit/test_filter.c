/* Unit tests for the particle filter: exactness against a Kalman filter where the model is
 * linear-Gaussian, reproducibility, theta = 1 against Ricker, degenerate cases, the
 * fixed-random-number mode and the drawn trajectory, each for both proposals (the tests that
 * take `_i` run once with the guided and once with the bootstrap proposal); then the guided
 * proposal's own checks: no bias against a long bootstrap run on count models, a far smaller
 * spread, and an outlying count. */
#include "tf_test.h"
#include <math.h>
#include <stdint.h>
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

/* A filter with the proposal of loop index i (0 guided, 1 bootstrap). */
static tf_filter *filter_for(const tf_model *m, const tf_series *s, size_t n, int i)
{
    tf_filter *f = tf_filter_alloc(m, s, n);
    ck_assert_ptr_nonnull(f);
    tf_filter_set_proposal(f, i ? TF_PROPOSAL_BOOTSTRAP : TF_PROPOSAL_GUIDED);
    return f;
}

static tf_rng stream(uint64_t seed, uint64_t key)
{
    tf_rng r;
    tf_rng_derive(&r, seed, &key, 1);
    return r;
}

/* A series simulated from m at theta from N_1 = start, with years listed in missing[] (ended by
 * -1) left unsurveyed. */
static tf_series *simulated(const tf_model *m, const double *theta, double start, size_t T, const int *missing,
                            const double *effort, uint64_t seed)
{
    double x[200], y[200];
    ck_assert_uint_le(T, 200);
    tf_rng r = stream(seed, 3);
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_simulate(m, theta, log(start), effort, T, &r, x, y, &err), TF_OK);
    for (const int *k = missing; k && *k >= 0; k++)
        y[*k] = NAN;
    tf_series *s = tf_series_new("sim", 2000, T, y, effort, NULL, &err);
    ck_assert_ptr_nonnull(s);
    return s;
}

/* Exact log-likelihood and smoothed means/variances of Gompertz + log-normal, which is linear-
 * Gaussian in x and z = ln(y / E) (Dennis et al. 2006, Ecol. Monogr. 76:323, eqs. 1-2): the
 * Kalman filter (Harvey 1989, Forecasting, Structural Time Series Models and the Kalman Filter,
 * eqs. 3.2.3-3.2.4 and the prediction-error decomposition 3.4.7) and the Rauch-Tung-Striebel
 * smoother (Rauch, Tung & Striebel 1965, AIAA J. 3:1445). The density of y adds -ln y. */
static double kalman(const tf_model *m, const double *theta, const tf_series *s, double *sm_mean, double *sm_var)
{
    const double r = theta[0], lnK = log(theta[1]), sigma = theta[2], tau = theta[3];
    const double a = r, c = 1.0 - r / lnK;
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    size_t T = tf_series_n_years(s);
    double ap[200], pp[200], af[200], pf[200];
    double at = tf_model_x1_mean(m), pt = tf_model_x1_sd(m) * tf_model_x1_sd(m), ll = 0.0;
    for (size_t t = 0; t < T; t++) {
        ap[t] = at;
        pp[t] = pt;
        if (!isnan(y[t])) {
            double z = log(y[t] / e[t]), F = pt + tau * tau, v = z - at;
            ll += -0.5 * (log(2 * 3.14159265358979323846 * F) + v * v / F) - log(y[t]);
            at += pt * v / F;
            pt -= pt * pt / F;
        }
        af[t] = at;
        pf[t] = pt;
        at = a + c * at;
        pt = c * c * pt + sigma * sigma;
    }
    if (sm_mean) {
        sm_mean[T - 1] = af[T - 1];
        sm_var[T - 1] = pf[T - 1];
        for (size_t t = T - 1; t-- > 0;) {
            double J = pf[t] * c / pp[t + 1];
            sm_mean[t] = af[t] + J * (sm_mean[t + 1] - ap[t + 1]);
            sm_var[t] = pf[t] + J * J * (sm_var[t + 1] - pp[t + 1]);
        }
    }
    return ll;
}

/* The likelihood estimate is unbiased: the mean of L^ / L over R runs is 1. Its standard error
 * is sd(L^ / L) / sqrt(R) from the same runs; 4 se. Run for the standard and the fixed mode,
 * on a series with missing years and varying effort. */
START_TEST(estimate_is_unbiased_against_kalman)
{
    tf_model *m = make("gompertz", "lognormal");
    const double theta[] = {0.6, 800.0, 0.15, 0.2};
    static const int missing[] = {4, 5, 11, -1};
    double effort[25];
    for (int t = 0; t < 25; t++)
        effort[t] = 1.0 + 0.5 * (t % 4);
    tf_series *s = simulated(m, theta, 300.0, 25, missing, effort, 42);
    tf_model_set_initial(m, log(300.0), 0.5);
    double exact = kalman(m, theta, s, NULL, NULL);
    ck_assert(isfinite(exact));
    enum { R = 400, N = 200 };
    tf_filter *f = filter_for(m, s, N, _i);
    size_t nm = tf_filter_n_move(f), np = tf_filter_n_pick(f);
    ck_assert_uint_eq(nm, 25 * N);
    ck_assert_uint_eq(np, 25);
    double *zm = malloc(nm * sizeof *zm), *zp = malloc(np * sizeof *zp);
    tf_rng r = stream(7, 1);
    for (int mode = 0; mode < 2; mode++) {
        double sw = 0, sw2 = 0, sl = 0;
        for (int k = 0; k < R; k++) {
            double ll;
            if (mode == 0) {
                ll = tf_filter_loglik(f, theta, &r, NULL);
            } else {
                tf_rng_fill_normal(&r, zm, nm);
                tf_rng_fill_normal(&r, zp, np);
                ll = tf_filter_loglik_fixed(f, theta, zm, zp, NULL);
            }
            double w = exp(ll - exact);
            sw += w;
            sw2 += w * w;
            sl += ll;
        }
        double mean = sw / R, se = sqrt((sw2 / R - mean * mean) / R);
        ck_assert_msg(fabs(mean - 1.0) < 4 * se, "%s, mode %d: mean L^/L = %g, se %g",
                      tf_filter_proposal_name(tf_filter_proposal(f)), mode, mean, se);
        /* Sanity of the test itself: the estimates do vary, so the check has power. */
        ck_assert(se > 1e-4);
        ck_assert(fabs(sl / R - exact) < 1.0);
    }
    free(zm);
    free(zp);
    tf_filter_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* The traced trajectory: its mean over M independent runs matches the smoothed means. The
 * standard error of a mean of M draws is sqrt(V_t / M); 5 se. N is large enough that the
 * traced path's own finite-N bias is far below that (with M = 3000 runs all 20 years agreed
 * within 1.3 se when the test was written). */
START_TEST(trajectory_follows_the_smoother)
{
    tf_model *m = make("gompertz", "lognormal");
    const double theta[] = {0.5, 2000.0, 0.2, 0.3};
    static const int missing[] = {7, 8, -1};
    tf_series *s = simulated(m, theta, 500.0, 20, missing, NULL, 5);
    tf_model_set_initial(m, log(500.0), 0.5);
    double sm[20], sv[20];
    kalman(m, theta, s, sm, sv);
    enum { M = 400, N = 2000 };
    tf_filter *f = filter_for(m, s, N, _i);
    double path[20], sum[20] = {0};
    tf_rng r = stream(8, 2);
    for (int k = 0; k < M; k++) {
        double ll = tf_filter_loglik(f, theta, &r, path);
        ck_assert(isfinite(ll));
        for (int t = 0; t < 20; t++)
            sum[t] += path[t];
    }
    for (int t = 0; t < 20; t++) {
        double mean = sum[t] / M, tol = 5 * sqrt(sv[t] / M);
        ck_assert_msg(fabs(mean - sm[t]) < tol, "year %d: path mean %g, smoother %g (tol %g)", t, mean, sm[t], tol);
    }
    tf_filter_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

START_TEST(same_seed_same_estimate)
{
    tf_model *m = make("ricker", "negbin");
    const double theta[] = {0.7, 600.0, 0.1, 15.0};
    tf_series *s = simulated(m, theta, 200.0, 30, NULL, NULL, 1);
    tf_model_set_initial(m, log(200.0), 1.0);
    tf_filter *f = filter_for(m, s, 300, _i);
    tf_rng a = stream(99, 1), b = a, c = stream(100, 1);
    double pa[30], pb[30];
    double la = tf_filter_loglik(f, theta, &a, pa), lb = tf_filter_loglik(f, theta, &b, pb);
    ck_assert(isfinite(la));
    ck_assert_double_eq(la, lb);
    ck_assert_int_eq(memcmp(pa, pb, sizeof pa), 0);
    ck_assert_int_eq(memcmp(&a, &b, sizeof a), 0); /* both streams advanced alike */
    ck_assert_double_ne(la, tf_filter_loglik(f, theta, &c, NULL));
    /* The stream moves on: a second call differs. */
    ck_assert_double_ne(tf_filter_loglik(f, theta, &a, NULL), la);
    tf_filter_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* theta = 1 is the Ricker model exactly (growth_theta_logistic.c), so with the same random
 * numbers the estimates are bit-identical, in both modes. */
START_TEST(theta_one_reproduces_ricker)
{
    static const char *const obs[] = {"poisson", "lognormal", "negbin"};
    for (int k = 0; k < 3; k++) {
        tf_model *mr = make("ricker", obs[k]), *mt = make("theta-logistic", obs[k]);
        const double tr[] = {0.9, 450.0, 0.12, 0.3}, tt[] = {0.9, 450.0, 1.0, 0.12, 0.3};
        tf_series *s = simulated(mr, tr, 100.0, 30, NULL, NULL, 11 + k);
        tf_model_set_initial(mr, log(100.0), 0.7);
        tf_model_set_initial(mt, log(100.0), 0.7);
        tf_filter *fr = filter_for(mr, s, 1000, _i), *ft = filter_for(mt, s, 1000, _i);
        tf_rng a = stream(5, 5), b = a;
        double pa[30], pb[30];
        double la = tf_filter_loglik(fr, tr, &a, pa), lb = tf_filter_loglik(ft, tt, &b, pb);
        ck_assert(isfinite(la));
        ck_assert_msg(la == lb, "%s: ricker %.17g, theta-logistic %.17g", obs[k], la, lb);
        ck_assert_int_eq(memcmp(pa, pb, sizeof pa), 0);
        size_t nm = tf_filter_n_move(fr);
        double *zm = malloc(nm * sizeof *zm), zp[30];
        tf_rng_fill_normal(&a, zm, nm);
        tf_rng_fill_normal(&a, zp, 30);
        ck_assert_double_eq(tf_filter_loglik_fixed(fr, tr, zm, zp, NULL), tf_filter_loglik_fixed(ft, tt, zm, zp, NULL));
        /* and theta away from 1 is a different model */
        const double t2[] = {0.9, 450.0, 1.5, 0.12, 0.3};
        ck_assert_double_ne(tf_filter_loglik_fixed(ft, t2, zm, zp, NULL), tf_filter_loglik_fixed(fr, tr, zm, zp, NULL));
        free(zm);
        tf_filter_free(fr);
        tf_filter_free(ft);
        tf_series_free(s);
        tf_model_free(mr);
        tf_model_free(mt);
    }
}
END_TEST

/* At the parameters that made the data the estimate beats clearly wrong ones. Each is the log
 * of the mean of R estimates; the margin required is 10 times the larger delta-method se. */
static double mean_loglik(tf_filter *f, const double *theta, tf_rng *r, double *se)
{
    enum { R = 8 };
    double l[R], mx = -INFINITY;
    for (int k = 0; k < R; k++) {
        l[k] = tf_filter_loglik(f, theta, r, NULL);
        mx = fmax(mx, l[k]);
    }
    double s = 0, s2 = 0;
    for (int k = 0; k < R; k++) {
        double w = exp(l[k] - mx);
        s += w;
        s2 += w * w;
    }
    double mean = s / R;
    *se = sqrt((s2 / R - mean * mean) / (R - 1)) / mean;
    return mx + log(mean);
}

START_TEST(truth_beats_wrong_parameters)
{
    tf_model *m = make("ricker", "poisson");
    const double truth[] = {0.8, 500.0, 0.1};
    tf_series *s = simulated(m, truth, 150.0, 30, NULL, NULL, 21);
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_initial_from_series(m, s, &err), TF_OK);
    tf_filter *f = filter_for(m, s, 2000, _i);
    tf_rng r = stream(3, 3);
    const double wrong[][3] = {{0.8, 150.0, 0.1}, {0.8, 1500.0, 0.1}, {0.05, 500.0, 0.1}};
    double se0, l0 = mean_loglik(f, truth, &r, &se0);
    ck_assert(isfinite(l0));
    for (int k = 0; k < 3; k++) {
        double se1, l1 = mean_loglik(f, wrong[k], &r, &se1);
        ck_assert_msg(l0 - l1 > 10 * fmax(se0, se1), "wrong set %d: %g vs truth %g", k, l1, l0);
    }
    tf_filter_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* Parameter sets that break a step return -inf, never NaN, and never crash. */
START_TEST(degenerate_cases_are_minus_infinity)
{
    double y[] = {120, 95, 130, 2000, 110, 0, 140};
    tf_error err;
    tf_error_init(&err);
    tf_series *s = tf_series_new("d", 2000, 7, y, NULL, NULL, &err);
    static const struct {
        const char *g, *o;
        double theta[5];
        int must_be_inf;
    } cases[] = {
        {"exponential", "poisson", {1e6, 0.1}, 1},         /* abundance overflows */
        /* exp(x) underflows to 0 but x itself stays finite: the kernels work with x, so the
         * estimate is finite (about -1e6 y per year) and must not be NaN. */
        {"exponential", "negbin", {-1e6, 0.1, 5}, 0},
        {"ricker", "poisson", {4.9, 1e-320, 0.1}, 1},      /* K tiny: N / K overflows, x = -inf */
        {"theta-logistic", "negbin", {4.9, 1e-300, 19.9, 0.1, 2}, 1},
        {"gompertz", "poisson", {4.9, 1.0000001, 0.1}, 1}, /* ln K tiny: x explodes */
        {"ricker", "lognormal", {0.5, 100, 0.1, 0.2}, 1},  /* zero count under the log-normal */
        {"ricker", "poisson", {0.5, 100, 1e-300, 0}, 0},   /* sigma tiny, count far off: finite or -inf */
        {"ricker", "lognormal", {0.5, 100, 1e-300, 1e-300}, 1},
        {"ricker", "poisson", {0.5, -3, 0.1}, 1},          /* outside the support */
        {"ricker", "poisson", {NAN, 100, 0.1}, 1},
        {"gompertz", "poisson", {0.5, 1.0, 0.1}, 1},
        {"exponential", "poisson", {0.0, 0.0}, 1},
        {"exponential", "poisson", {0.0, INFINITY}, 1},
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        tf_model *m = make(cases[k].g, cases[k].o);
        tf_model_set_initial(m, log(120.0), 1e-300);
        for (size_t n = 1; n <= 1000; n *= 10) {
            tf_filter *f = filter_for(m, s, n, _i);
            tf_rng r = stream(1, k);
            double path[7];
            double a = tf_filter_loglik(f, cases[k].theta, &r, NULL), b = tf_filter_loglik(f, cases[k].theta, &r, path);
            ck_assert_msg(!isnan(a) && !isnan(b), "case %zu n %zu: NaN", k, n);
            ck_assert(a < INFINITY && b < INFINITY);
            if (cases[k].must_be_inf)
                ck_assert_msg(a == -INFINITY && b == -INFINITY, "case %zu n %zu: %g %g", k, n, a, b);
            size_t nm = tf_filter_n_move(f);
            double *zm = calloc(nm, sizeof *zm), zp[7] = {0};
            double c = tf_filter_loglik_fixed(f, cases[k].theta, zm, zp, path);
            ck_assert(!isnan(c));
            if (cases[k].must_be_inf)
                ck_assert(c == -INFINITY);
            free(zm);
            tf_filter_free(f);
        }
        tf_model_free(m);
    }
    /* A first-year prior that is not a distribution. */
    tf_model *m = make("ricker", "poisson");
    tf_filter *f = tf_filter_alloc(m, s, 10);
    const double ok[] = {0.5, 100, 0.1};
    tf_rng r = stream(1, 1);
    tf_model_set_initial(m, 4.0, 0.0);
    ck_assert(tf_filter_loglik(f, ok, &r, NULL) == -INFINITY);
    tf_model_set_initial(m, NAN, 1.0);
    ck_assert(tf_filter_loglik(f, ok, &r, NULL) == -INFINITY);
    tf_model_set_initial(m, 4.0, 1.0);
    ck_assert(isfinite(tf_filter_loglik(f, ok, &r, NULL)));
    tf_filter_free(f);
    ck_assert_ptr_null(tf_filter_alloc(m, s, 0));
    ck_assert_ptr_null(tf_filter_alloc(m, s, UINT32_MAX)); /* indices are 32-bit */
    tf_filter_free(NULL);
    tf_model_free(m);
    tf_series_free(s);
}
END_TEST

/* Fixed mode: the same buffers give the same estimate, whatever ran in between (the cached
 * year constants must follow the parameters), and a small change of the buffers changes the
 * estimate a little: sorting before resampling makes it continuous in the random numbers but
 * for rare jumps between neighbouring particles (Deligiannidis, Doucet & Pitt 2018, JRSS B
 * 80:839, Sect. 4.1). Measured against the spread of independent estimates. */
START_TEST(fixed_mode_is_deterministic_and_smooth)
{
    tf_model *m = make("ricker", "negbin");
    const double theta[] = {0.7, 600.0, 0.15, 10.0}, other[] = {0.7, 600.0, 0.15, 3.0};
    tf_series *s = simulated(m, theta, 200.0, 30, NULL, NULL, 31);
    tf_model_set_initial(m, log(200.0), 0.5);
    enum { N = 500, R = 40 };
    tf_filter *f = filter_for(m, s, N, _i);
    size_t nm = tf_filter_n_move(f), np = tf_filter_n_pick(f);
    double *zm = malloc(nm * sizeof *zm), *zp = malloc(np * sizeof *zp);
    double *zm2 = malloc(nm * sizeof *zm2), *zp2 = malloc(np * sizeof *zp2);
    tf_rng r = stream(4, 4);
    /* Spread of independent estimates. */
    double l[R], s1 = 0, s2 = 0;
    for (int k = 0; k < R; k++) {
        tf_rng_fill_normal(&r, zm, nm);
        tf_rng_fill_normal(&r, zp, np);
        l[k] = tf_filter_loglik_fixed(f, theta, zm, zp, NULL);
        s1 += l[k];
        s2 += l[k] * l[k];
    }
    double sd = sqrt((s2 - s1 * s1 / R) / (R - 1));
    ck_assert(sd > 0.01);
    ck_assert_double_eq(tf_filter_loglik_fixed(f, theta, zm, zp, NULL), l[R - 1]);
    ck_assert(tf_filter_loglik_fixed(f, other, zm, zp, NULL) != l[R - 1]);
    tf_rng r2 = stream(9, 9);
    tf_filter_loglik(f, other, &r2, NULL);
    ck_assert_double_eq(tf_filter_loglik_fixed(f, theta, zm, zp, NULL), l[R - 1]);
    double p1[30], p2[30];
    tf_filter_loglik_fixed(f, theta, zm, zp, p1);
    tf_filter_loglik_fixed(f, theta, zm, zp, p2);
    ck_assert_int_eq(memcmp(p1, p2, sizeof p1), 0);

    /* Perturbations z' = rho z + sqrt(1 - rho^2) xi, as in the correlated pseudo-marginal
     * method. With rho = 1 - 1e-8 the buffers move by ~1.4e-4: the estimate must move by far
     * less than its spread (1 %); with rho = 0.99 still clearly less (a third). Independent
     * buffers would move it by sqrt(2) sd. Averages over 20 perturbations. */
    static const double rhos[] = {1 - 1e-8, 0.99};
    static const double limit[] = {0.01, 0.35};
    for (int j = 0; j < 2; j++) {
        double rho = rhos[j], q = sqrt(1 - rho * rho), dsum = 0;
        for (int k = 0; k < 20; k++) {
            for (size_t i = 0; i < nm; i++)
                zm2[i] = rho * zm[i] + q * tf_rng_normal(&r);
            for (size_t i = 0; i < np; i++)
                zp2[i] = rho * zp[i] + q * tf_rng_normal(&r);
            dsum += fabs(tf_filter_loglik_fixed(f, theta, zm2, zp2, NULL) - l[R - 1]);
        }
        ck_assert_msg(dsum / 20 < limit[j] * sd, "rho %g: mean |change| %g, sd %g", rho, dsum / 20, sd);
    }
    free(zm);
    free(zp);
    free(zm2);
    free(zp2);
    tf_filter_free(f);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* Exact log-likelihood of a one-dimensional state-space model by numerical integration on a grid
 * of G points over [lo, hi] (the grid filter of Kitagawa 1987, JASA 82:1032, section 3: the
 * predictive and filtering densities held at the grid points, the transition integral by the
 * trapezoid rule). With a grid step far below the narrowest density involved (the process noise
 * sigma and the count's sd on the log scale) its error is far below the Monte Carlo errors it
 * is compared with. */
/* sqrt(2 pi). */
#define SQRT_2PI 2.50662827463100050242

static double grid_loglik(const tf_model *m, const double *theta, const tf_series *s, double lo, double hi, size_t G)
{
    const tf_growth_type *g = tf_model_growth(m);
    const tf_obs_type *o = tf_model_obs(m);
    const double sigma = theta[g->n_params], *p_obs = theta + g->n_params + 1;
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    const size_t T = tf_series_n_years(s);
    double *x = malloc(G * sizeof *x), *pred = malloc(G * sizeof *pred), *filt = malloc(G * sizeof *filt),
           *mv = malloc(G * sizeof *mv);
    const double h = (hi - lo) / (double)(G - 1), mu1 = tf_model_x1_mean(m), sd1 = tf_model_x1_sd(m);
    for (size_t i = 0; i < G; i++) {
        x[i] = lo + h * (double)i;
        double z = (x[i] - mu1) / sd1;
        pred[i] = exp(-0.5 * z * z) / (sd1 * SQRT_2PI);
    }
    g->drift(theta, x, mv, G);
    double ll = 0;
    for (size_t t = 0; t < T; t++) {
        double total = 0;
        for (size_t i = 0; i < G; i++) {
            filt[i] = pred[i];
            if (!isnan(y[t]))
                filt[i] *= exp(o->logpmf(p_obs, y[t], e[t] * exp(x[i])));
            total += (i == 0 || i == G - 1 ? 0.5 : 1.0) * filt[i] * h;
        }
        ll += log(total);
        for (size_t i = 0; i < G; i++)
            filt[i] /= total;
        if (t + 1 == T)
            break;
        for (size_t j = 0; j < G; j++) {
            double acc = 0;
            for (size_t i = 0; i < G; i++) {
                double z = (x[j] - mv[i]) / sigma;
                if (fabs(z) < 12)
                    acc += (i == 0 || i == G - 1 ? 0.5 : 1.0) * filt[i] * exp(-0.5 * z * z);
            }
            pred[j] = acc * h / (sigma * SQRT_2PI);
        }
    }
    free(x);
    free(pred);
    free(filt);
    free(mv);
    return ll;
}

/* Mean and standard error of L^ / L_ref over R estimates by f (mean of exp(ll - ref)). */
static void ratio_mean(tf_filter *f, const double *theta, double ref, size_t R, tf_rng *r, double *mean, double *se)
{
    double sw = 0, sw2 = 0;
    for (size_t k = 0; k < R; k++) {
        double w = exp(tf_filter_loglik(f, theta, r, NULL) - ref);
        sw += w;
        sw2 += w * w;
    }
    *mean = sw / (double)R;
    *se = sqrt(fmax(sw2 / (double)R - *mean * *mean, 0) / (double)(R - 1));
}

/* The guided estimate has no bias on the count models, whose pseudo-observations are only
 * approximations: the mean of L^ / L over R runs at N = 100 particles is 1 within 4 standard
 * errors, L from the grid filter above (exact up to quadrature) or, where counts are too large
 * for a grid, from 10 bootstrap runs of 100000 particles (the mean of two unbiased estimates
 * then differs by less than 4 combined standard errors). Series: small counts (under 10) with
 * zeros, missing years and effort changes; medium counts; counts near 10^5; and one count ten
 * times too high or too low. */
START_TEST(guided_has_no_bias_on_count_models)
{
    static const int missing[] = {3, 9, 10, 17, -1};
    double effort[25];
    for (int t = 0; t < 25; t++)
        effort[t] = t < 8 ? 1.0 : (t < 16 ? 2.5 : 0.6);
    static const struct {
        const char *g, *o;
        double theta[4], start, outlier; /* outlier: factor on year 12's count (1 = none) */
        int grid;
    } cases[] = {
        {"ricker", "poisson", {0.3, 6.0, 0.2}, 5.0, 1, 1},
        {"ricker", "negbin", {0.3, 6.0, 0.2, 3.0}, 5.0, 1, 1},
        {"ricker", "poisson", {0.5, 400.0, 0.1}, 300.0, 1, 1},
        {"gompertz", "negbin", {0.4, 400.0, 0.1, 10.0}, 300.0, 1, 1},
        {"ricker", "poisson", {0.5, 400.0, 0.3}, 300.0, 10, 1},
        {"ricker", "poisson", {0.5, 400.0, 0.3}, 300.0, 0.1, 1},
        {"ricker", "negbin", {0.5, 400.0, 0.1, 10.0}, 300.0, 10, 1},
        {"gompertz", "poisson", {0.3, 1e5, 0.1}, 1e5, 1, 0},
        {"gompertz", "negbin", {0.3, 1e5, 0.1, 50.0}, 1e5, 1, 0},
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        tf_model *m = make(cases[k].g, cases[k].o);
        tf_series *s = simulated(m, cases[k].theta, cases[k].start, 25, missing, cases[k].grid ? effort : NULL, 50 + k);
        if (cases[k].outlier != 1) {
            double *y = (double *)tf_series_counts(s);
            y[12] = round(y[12] * cases[k].outlier);
        }
        tf_error err;
        tf_error_init(&err);
        ck_assert_int_eq(tf_model_initial_from_series(m, s, &err), TF_OK);
        tf_rng r = stream(60, k);
        double ref, mean, se;
        tf_filter *f = filter_for(m, s, 100, 0);
        if (cases[k].grid) {
            double c = log(cases[k].theta[1]);
            ref = grid_loglik(m, cases[k].theta, s, c - 5, c + 4, 3000);
            ratio_mean(f, cases[k].theta, ref, 400, &r, &mean, &se);
            ck_assert_msg(fabs(mean - 1) < 4 * se, "case %zu: mean L^/L %g, se %g", k, mean, se);
        } else {
            tf_filter *b = filter_for(m, s, 100000, 1);
            ref = tf_filter_loglik(b, cases[k].theta, &r, NULL);
            double mb, seb;
            ratio_mean(b, cases[k].theta, ref, 10, &r, &mb, &seb);
            ratio_mean(f, cases[k].theta, ref, 400, &r, &mean, &se);
            ck_assert_msg(fabs(mean - mb) < 4 * sqrt(se * se + seb * seb), "case %zu: guided %g (se %g), bootstrap %g (se %g)",
                          k, mean, se, mb, seb);
            tf_filter_free(b);
        }
        /* The check has power: the estimates do vary, and not wildly. */
        ck_assert_msg(se > 1e-4 && se < 0.1, "case %zu: se %g", k, se);
        tf_filter_free(f);
        tf_series_free(s);
        tf_model_free(m);
    }
}
END_TEST

/* SD of the log-likelihood estimate over R runs. */
static double loglik_sd(tf_filter *f, const double *theta, size_t R, tf_rng *r)
{
    double s1 = 0, s2 = 0;
    for (size_t k = 0; k < R; k++) {
        double l = tf_filter_loglik(f, theta, r, NULL);
        s1 += l;
        s2 += l * l;
    }
    return sqrt(fmax(s2 - s1 * s1 / (double)R, 0) / (double)(R - 1));
}

/* The point of the guided filter: at the same particle count its log-likelihood estimate
 * spreads far less than the bootstrap filter's where counts are large. Measured at N = 100 over
 * R = 100 runs each (an SD's relative standard error is about 1 / sqrt(2 R) = 7 %, so the
 * factors below hold with a wide margin: measured 5-500 when the test was written): Gompertz +
 * log-normal (fully adapted; factor 2), Ricker + Poisson with counts near 400 (5), Gompertz +
 * Poisson with counts in the thousands (20), and one count ten times too high (20). */
START_TEST(guided_spread_is_far_smaller)
{
    static const struct {
        const char *g, *o;
        double theta[4], start, outlier, factor;
    } cases[] = {
        {"gompertz", "lognormal", {0.6, 800.0, 0.15, 0.1}, 300, 1, 2},
        {"ricker", "poisson", {0.5, 400.0, 0.1}, 300, 1, 5},
        {"gompertz", "poisson", {0.3, 4000.0, 0.15}, 4800, 1, 20},
        {"ricker", "poisson", {0.5, 400.0, 0.3}, 300, 10, 20},
    };
    for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
        tf_model *m = make(cases[k].g, cases[k].o);
        tf_series *s = simulated(m, cases[k].theta, cases[k].start, 35, NULL, NULL, 70 + k);
        if (cases[k].outlier != 1) {
            double *y = (double *)tf_series_counts(s);
            y[14] = round(y[14] * cases[k].outlier);
        }
        tf_error err;
        tf_error_init(&err);
        ck_assert_int_eq(tf_model_initial_from_series(m, s, &err), TF_OK);
        tf_filter *fg = filter_for(m, s, 100, 0), *fb = filter_for(m, s, 100, 1);
        tf_rng r = stream(80, k);
        double sg = loglik_sd(fg, cases[k].theta, 100, &r), sb = loglik_sd(fb, cases[k].theta, 100, &r);
        ck_assert_msg(sg > 0 && sb > cases[k].factor * sg, "case %zu: guided sd %g, bootstrap sd %g", k, sg, sb);
        tf_filter_free(fg);
        tf_filter_free(fb);
        tf_series_free(s);
        tf_model_free(m);
    }
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("filter");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    /* Loop index 0: the guided proposal; 1: the bootstrap proposal. */
    tcase_add_loop_test(tc, estimate_is_unbiased_against_kalman, 0, 2);
    tcase_add_loop_test(tc, trajectory_follows_the_smoother, 0, 2);
    tcase_add_loop_test(tc, same_seed_same_estimate, 0, 2);
    tcase_add_loop_test(tc, theta_one_reproduces_ricker, 0, 2);
    tcase_add_loop_test(tc, truth_beats_wrong_parameters, 0, 2);
    tcase_add_loop_test(tc, degenerate_cases_are_minus_infinity, 0, 2);
    tcase_add_loop_test(tc, fixed_mode_is_deterministic_and_smooth, 0, 2);
    TF_ADD_STATISTICAL_TEST(tc, guided_has_no_bias_on_count_models);
    TF_ADD_STATISTICAL_TEST(tc, guided_spread_is_far_smaller);
    suite_add_tcase(s, tc);
    return s;
}
