/* Unit tests of the convergence diagnostics: known results for AR(1) and iid chains, detection
 * of chains that disagree in location or scale, and agreement with an independent numpy
 * implementation (tests/ref/test_diagnostics_ref.py) on saved draws. */
#include "tf_test.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>

#include "sampler/diagnostics.h"
#include "util/rng.h"

enum { M = 4, N_ITER = 2000 };

static tf_diag_workspace *new_ws(size_t m, size_t n)
{
    tf_diag_workspace *w;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_diag_workspace_alloc(m, n, &w, &err), TF_OK);
    return w;
}

static void seed(tf_rng *r, uint64_t a, uint64_t b)
{
    uint64_t k[2] = {a, b};
    tf_rng_derive(r, 2026, k, 2);
}

/* A stationary AR(1) chain x_{i+1} = rho x_i + e_i, e_i ~ N(0, 1), started from its stationary
 * distribution N(0, 1 / (1 - rho^2)). */
static void ar1(tf_rng *r, double rho, double *x, size_t n)
{
    double v = tf_rng_normal(r) / sqrt(1 - rho * rho);
    for (size_t i = 0; i < n; i++) {
        x[i] = v;
        v = rho * v + tf_rng_normal(r);
    }
}

static tf_diag_summary summarise(tf_diag_workspace *w, const double *x, size_t m, size_t n)
{
    const double *ch[16];
    ck_assert_uint_le(m, 16);
    for (size_t c = 0; c < m; c++)
        ch[c] = x + c * n;
    tf_diag_summary d;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_diag_summarise(w, ch, m, n, 1, &d, &err), TF_OK);
    return d;
}

/* Mean and standard error of the mean of R replicate values. */
typedef struct {
    double sum, sum2;
    int n;
} acc;

static void acc_add(acc *a, double v)
{
    a->sum += v;
    a->sum2 += v * v;
    a->n++;
}
static double acc_mean(const acc *a) { return a->sum / a->n; }
static double acc_se(const acc *a)
{
    double m = acc_mean(a);
    return sqrt((a->sum2 / a->n - m * m) * a->n / (a->n - 1) / a->n);
}

/* AR(1) with coefficient rho has integrated autocorrelation time (1 + rho) / (1 - rho), so
 * ESS = S (1 - rho) / (1 + rho) for S draws (common practice, no source), and the MCSE of the
 * mean is sd(x) sqrt(tau / S), sd(x) = 1 / sqrt(1 - rho^2).
 * Tolerance: the mean of R = 20 replicate estimates must lie within 4 standard errors (from
 * the replicates' own spread) of the truth. Over 200 replicates of these sizes the estimator's
 * bias was below 1.6 % (rho = 0; -1.0 % at 0.5, +0.6 % at 0.9, -0.2 % at -0.3) against a
 * per-estimate spread of 3-12 %, so the bias sits well inside 4 standard errors. */
START_TEST(ar1_ess_matches_theory)
{
    const double rhos[] = {0, 0.5, 0.9, -0.3};
    enum { R = 20 };
    tf_diag_workspace *w = new_ws(M, N_ITER);
    double *x = malloc(M * N_ITER * sizeof *x);
    ck_assert_ptr_nonnull(x);
    for (size_t k = 0; k < sizeof rhos / sizeof rhos[0]; k++) {
        double rho = rhos[k], S = M * N_ITER;
        double truth = S * (1 - rho) / (1 + rho);
        double true_mcse = sqrt((1 + rho) / (1 - rho) / S) / sqrt(1 - rho * rho);
        acc ess_mean = {0}, ess_bulk = {0}, mcse = {0};
        for (int rep = 0; rep < R; rep++) {
            tf_rng r;
            seed(&r, k, (uint64_t)rep);
            for (int c = 0; c < M; c++)
                ar1(&r, rho, x + c * N_ITER, N_ITER);
            tf_diag_summary d = summarise(w, x, M, N_ITER);
            acc_add(&ess_mean, d.ess_mean);
            acc_add(&ess_bulk, d.ess_bulk);
            acc_add(&mcse, d.mcse_mean / true_mcse);
        }
        ck_assert_msg(fabs(acc_mean(&ess_mean) - truth) < 4 * acc_se(&ess_mean),
                      "rho %g: ESS of the mean %g +- %g, theory %g", rho, acc_mean(&ess_mean), acc_se(&ess_mean),
                      truth);
        /* Rank normalisation of Gaussian draws is nearly the identity: the same ESS. */
        ck_assert_msg(fabs(acc_mean(&ess_bulk) - truth) < 4 * acc_se(&ess_bulk), "rho %g: bulk ESS %g +- %g, theory %g",
                      rho, acc_mean(&ess_bulk), acc_se(&ess_bulk), truth);
        ck_assert_msg(fabs(acc_mean(&mcse) - 1) < 4 * acc_se(&mcse), "rho %g: MCSE / theory %g +- %g", rho,
                      acc_mean(&mcse), acc_se(&mcse));
    }
    free(x);
    tf_diag_workspace_free(w);
}
END_TEST

/* For iid chains split into m = 2M halves of N draws, R-hat^2 = (N-1)/N + B/(N W) with
 * B/(N W) ~ F / N, F ~ chi^2_{m-1} / (m-1) (between- over within-chain variance of normal
 * draws; rank-normalised draws are normal to this order). So R-hat lies in
 * [sqrt((N-1)/N), sqrt((N-1)/N + F_max / N)], F_max the chi-square quantile at 1 - 1e-6. The
 * lower end holds exactly (B >= 0).
 * MCSE of the p-quantile for iid normal draws: sqrt(p (1-p) / S) / phi(z_p), the asymptotic
 * sd of a sample quantile (Serfling 1980, Approximation Theorems of Mathematical Statistics,
 * section 2.3.3). Over 400 replicates the ratio estimate / theory was 1.00 +- 0.02 with a
 * per-estimate spread of 13-19 %; the test takes the mean of R = 40 within 4 standard errors. */
START_TEST(iid_chains_pass)
{
    enum { n = 1000, R = 40 };
    tf_diag_workspace *w = new_ws(M, n);
    double *x = malloc(M * n * sizeof *x);
    ck_assert_ptr_nonnull(x);
    double Nh = n / 2, m = 2 * M, S = M * n;
    double rhat_lo = sqrt((Nh - 1) / Nh);
    double rhat_hi = sqrt((Nh - 1) / Nh + gsl_cdf_chisq_Qinv(1e-6, m - 1) / (m - 1) / Nh);
    const double probs[3] = {0.05, 0.5, 0.95};
    acc q[3] = {{0}};
    for (int rep = 0; rep < R; rep++) {
        tf_rng r;
        seed(&r, 100, (uint64_t)rep);
        tf_rng_fill_normal(&r, x, M * n);
        tf_diag_summary d = summarise(w, x, M, n);
        ck_assert_msg(d.rhat_bulk >= rhat_lo - 1e-12 && d.rhat_bulk <= rhat_hi, "bulk R-hat %g outside [%g, %g]",
                      d.rhat_bulk, rhat_lo, rhat_hi);
        ck_assert_msg(d.rhat_folded >= rhat_lo - 1e-12 && d.rhat_folded <= rhat_hi,
                      "folded R-hat %g outside [%g, %g]", d.rhat_folded, rhat_lo, rhat_hi);
        ck_assert_double_eq(d.rhat, fmax(d.rhat_bulk, d.rhat_folded));
        const double mc[3] = {d.mcse_q05, d.mcse_q50, d.mcse_q95};
        for (int k = 0; k < 3; k++) {
            double zp = gsl_cdf_ugaussian_Pinv(probs[k]);
            acc_add(&q[k], mc[k] / (sqrt(probs[k] * (1 - probs[k]) / S) / gsl_ran_ugaussian_pdf(zp)));
        }
    }
    for (int k = 0; k < 3; k++)
        ck_assert_msg(fabs(acc_mean(&q[k]) - 1) < 4 * acc_se(&q[k]), "MCSE of the %g quantile / theory: %g +- %g",
                      probs[k], acc_mean(&q[k]), acc_se(&q[k]));
    free(x);
    tf_diag_workspace_free(w);
}
END_TEST

/* Chains that disagree. The paper recommends trusting draws only when R-hat < 1.01. One chain of
 * four shifted by 1 sd: of the 8 half-chains 2 sit at 1, 6 at 0, so B/N ~ (8/7) (1/4)(3/4) =
 * 0.21 and R-hat ~ sqrt(1.21) = 1.10; the test asks for more than 1.05, far above the iid
 * bound (about 1.005 here, see iid_chains_pass). One chain of four with 3 times the sd of the
 * others and the same centre: the bulk R-hat cannot see it (all chains are centred alike) but
 * the folded R-hat, which compares |x - median|, must. */
START_TEST(disagreeing_chains_are_flagged)
{
    enum { n = 1000 };
    tf_diag_workspace *w = new_ws(M, n);
    double *x = malloc(M * n * sizeof *x);
    ck_assert_ptr_nonnull(x);
    tf_rng r;
    seed(&r, 200, 0);
    tf_rng_fill_normal(&r, x, M * n);
    for (int i = 0; i < n; i++)
        x[3 * n + i] += 1;
    tf_diag_summary d = summarise(w, x, M, n);
    ck_assert_msg(d.rhat_bulk > 1.05, "shifted chain: bulk R-hat %g", d.rhat_bulk);
    ck_assert_double_eq(d.rhat, fmax(d.rhat_bulk, d.rhat_folded));

    tf_rng_fill_normal(&r, x, M * n);
    for (int i = 0; i < n; i++)
        x[i] *= 3;
    d = summarise(w, x, M, n);
    ck_assert_msg(d.rhat_bulk < 1.01, "wide chain: bulk R-hat %g", d.rhat_bulk);
    ck_assert_msg(d.rhat_folded > 1.05, "wide chain: folded R-hat %g", d.rhat_folded);
    ck_assert_double_eq(d.rhat, d.rhat_folded);

    /* A heavy tail in one chain only (Student-t with 1 df there, normal elsewhere). */
    gsl_rng view;
    tf_rng_gsl_view(&r, &view);
    tf_rng_fill_normal(&r, x, M * n);
    for (int i = 0; i < n; i++)
        x[2 * n + i] = gsl_ran_tdist(&view, 1);
    d = summarise(w, x, M, n);
    ck_assert_msg(d.rhat_folded > 1.01, "heavy-tailed chain: folded R-hat %g", d.rhat_folded);
    ck_assert_msg(d.rhat > 1.01, "heavy-tailed chain: R-hat %g", d.rhat);
    free(x);
    tf_diag_workspace_free(w);
}
END_TEST

/* Reads one saved data set: one chain per line, comma-separated. */
static size_t read_chains(const char *path, double *x, size_t cap, size_t *n_iter)
{
    FILE *f = fopen(path, "r");
    ck_assert_msg(f != NULL, "cannot open %s", path);
    char line[65536];
    size_t m = 0, total = 0;
    *n_iter = 0;
    while (fgets(line, sizeof line, f)) {
        size_t n = 0;
        for (char *p = line; *p && *p != '\n';) {
            char *end;
            double v = strtod(p, &end);
            ck_assert_msg(end != p, "%s: bad number", path);
            ck_assert_uint_lt(total, cap);
            x[total++] = v;
            n++;
            p = *end == ',' ? end + 1 : end;
        }
        if (!n)
            continue;
        ck_assert_msg(!*n_iter || *n_iter == n, "%s: chains of unequal length", path);
        *n_iter = n;
        m++;
    }
    fclose(f);
    return m;
}

static double expected_value(const char *set, const char *stat)
{
    FILE *f = fopen(TF_TEST_DATA("diagnostics/expected.csv"), "r");
    ck_assert_ptr_nonnull(f);
    char line[256], want_key[128];
    snprintf(want_key, sizeof want_key, "%s,%s,", set, stat);
    double v = NAN;
    while (fgets(line, sizeof line, f))
        if (!strncmp(line, want_key, strlen(want_key)))
            v = strtod(line + strlen(want_key), NULL);
    fclose(f);
    ck_assert_msg(!isnan(v), "no expected value for %s %s", set, stat);
    return v;
}

/* The numpy reference computes autocovariances by direct sums where the C code uses an FFT, so
 * the two agree up to rounding: 1e-8 relative (or absolute near 0) is loose for that and tight
 * for any difference of formula. */
START_TEST(agrees_with_numpy_reference)
{
    const char *sets[] = {"ar1", "shifted", "scale", "ties"};
    static double x[8 * 1024];
    tf_diag_workspace *w = new_ws(4, 301);
    for (size_t s = 0; s < sizeof sets / sizeof sets[0]; s++) {
        char path[256];
        snprintf(path, sizeof path, "tests/data/diagnostics/%s.csv", sets[s]);
        size_t n;
        size_t m = read_chains(path, x, sizeof x / sizeof x[0], &n);
        tf_diag_summary d = summarise(w, x, m, n);
        struct {
            const char *name;
            double v;
        } got[] = {
            {"mean", d.mean},         {"sd", d.sd},
            {"q05", d.q05},           {"q50", d.q50},
            {"q95", d.q95},           {"rhat", d.rhat},
            {"rhat_bulk", d.rhat_bulk}, {"rhat_folded", d.rhat_folded},
            {"ess_bulk", d.ess_bulk}, {"ess_tail", d.ess_tail},
            {"ess_mean", d.ess_mean}, {"mcse_mean", d.mcse_mean},
            {"mcse_q05", d.mcse_q05}, {"mcse_q50", d.mcse_q50},
            {"mcse_q95", d.mcse_q95},
        };
        for (size_t k = 0; k < sizeof got / sizeof got[0]; k++) {
            double want = expected_value(sets[s], got[k].name);
            ck_assert_msg(fabs(got[k].v - want) <= 1e-8 * fmax(1, fabs(want)), "%s %s: C %.17g, numpy %.17g", sets[s],
                          got[k].name, got[k].v, want);
        }
    }
    tf_diag_workspace_free(w);
}
END_TEST

/* A strided layout (whole parameter vectors per iteration) gives the same numbers as contiguous
 * chains, and a workspace reused at a smaller size gives what a fresh one gives. */
START_TEST(strides_and_reuse)
{
    enum { n = 301, P = 3 };
    double *x = malloc(M * n * sizeof *x), *packed = malloc(M * n * P * sizeof *packed);
    ck_assert_ptr_nonnull(x);
    ck_assert_ptr_nonnull(packed);
    tf_rng r;
    seed(&r, 300, 0);
    for (int c = 0; c < M; c++)
        ar1(&r, 0.7, x + c * n, n);
    for (int c = 0; c < M; c++)
        for (int i = 0; i < n; i++)
            for (int p = 0; p < P; p++)
                packed[(c * n + i) * P + p] = p == 1 ? x[c * n + i] : -99;
    tf_diag_workspace *big = new_ws(8, 5000), *fresh = new_ws(M, n);
    tf_diag_summary a = summarise(fresh, x, M, n);
    tf_diag_summary warm = summarise(big, x, M, n); /* after nothing */
    double *tmp = malloc(8 * 5000 * sizeof *tmp);
    ck_assert_ptr_nonnull(tmp);
    tf_rng_fill_normal(&r, tmp, 8 * 5000);
    summarise(big, tmp, 8, 5000);
    tf_diag_summary b = summarise(big, x, M, n); /* after a larger job */
    const double *ch[M];
    for (int c = 0; c < M; c++)
        ch[c] = packed + (size_t)c * n * P + 1;
    tf_diag_summary s;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_diag_summarise(big, ch, M, n, P, &s, &err), TF_OK);
    const tf_diag_summary *all[3] = {&warm, &b, &s};
    for (int k = 0; k < 3; k++) {
        ck_assert_double_eq(all[k]->ess_bulk, a.ess_bulk);
        ck_assert_double_eq(all[k]->ess_tail, a.ess_tail);
        ck_assert_double_eq(all[k]->rhat, a.rhat);
        ck_assert_double_eq(all[k]->mcse_q50, a.mcse_q50);
        ck_assert_double_eq(all[k]->mean, a.mean);
    }
    ck_assert_uint_eq(s.n_chains, M);
    ck_assert_uint_eq(s.n_iter, n);
    free(tmp);
    free(x);
    free(packed);
    tf_diag_workspace_free(big);
    tf_diag_workspace_free(fresh);
}
END_TEST

START_TEST(bad_input_is_refused)
{
    tf_error err;
    tf_error_init(&err);
    tf_diag_workspace *w = (tf_diag_workspace *)&err;
    ck_assert_int_eq(tf_diag_workspace_alloc(0, 100, &w, &err), TF_ERR_INVALID);
    ck_assert_ptr_null(w);
    ck_assert_int_eq(tf_diag_workspace_alloc(2, 3, &w, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_diag_workspace_alloc(SIZE_MAX / 2, SIZE_MAX / 4, &w, &err), TF_ERR_INVALID);
    tf_diag_workspace_free(NULL);

    w = new_ws(2, 10);
    double a[10] = {1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, b[12] = {0};
    const double *ch[3] = {a, a, a};
    tf_diag_summary d;
    tf_error_init(&err);
    ck_assert_int_eq(tf_diag_summarise(w, ch, 3, 10, 1, &d, &err), TF_ERR_INVALID); /* more chains than room */
    ck_assert(isnan(d.ess_bulk));
    ck_assert_int_eq(tf_diag_summarise(w, ch, 2, 11, 1, &d, &err), TF_ERR_INVALID); /* longer than room */
    ck_assert_int_eq(tf_diag_summarise(w, ch, 2, 3, 1, &d, &err), TF_ERR_INVALID);  /* too short */
    ck_assert_int_eq(tf_diag_summarise(w, ch, 0, 10, 1, &d, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_diag_summarise(w, ch, 2, 10, 0, &d, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(err.n_items, 5);
    double c[10] = {1, 2, 3, 4, 5, 6, NAN, 8, 9, 10};
    ch[1] = c;
    tf_error_init(&err);
    ck_assert_int_eq(tf_diag_summarise(w, ch, 2, 10, 1, &d, &err), TF_ERR_INVALID);
    ck_assert_str_eq(err.items[0].what, "draw 7 of chain 2 is not a finite number");

    /* Constant draws: moments and quantiles exist, ESS and R-hat do not. */
    ch[0] = b;
    ch[1] = b;
    ck_assert_int_eq(tf_diag_summarise(w, ch, 2, 10, 1, &d, &err), TF_OK);
    ck_assert_double_eq(d.mean, 0);
    ck_assert_double_eq(d.sd, 0);
    ck_assert_double_eq(d.q95, 0);
    ck_assert(isnan(d.ess_bulk) && isnan(d.ess_tail) && isnan(d.ess_mean));
    ck_assert(isnan(d.rhat) && isnan(d.rhat_bulk));
    tf_diag_workspace_free(w);
}
END_TEST

static Suite *make_suite(void)
{
    gsl_set_error_handler_off();
    Suite *s = suite_create("diagnostics");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 120);
    tcase_add_test(tc, ar1_ess_matches_theory);
    tcase_add_test(tc, iid_chains_pass);
    tcase_add_test(tc, disagreeing_chains_are_flagged);
    tcase_add_test(tc, agrees_with_numpy_reference);
    tcase_add_test(tc, strides_and_reuse);
    tcase_add_test(tc, bad_input_is_refused);
    suite_add_tcase(s, tc);
    return s;
}
