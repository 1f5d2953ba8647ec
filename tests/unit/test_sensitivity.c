/* The prior sensitivity of a comparison: which alternatives are made, which candidates each one
 * changes, the prior ratio it reweights by against the densities written out, probabilities per
 * row, a user's callback (the same priors change nothing; an error names the alternative), the
 * refit where reweighting cannot be trusted, and the table built from it. The statistical checks
 * of the reweighted values (closed form, ln 2, direct runs) are in test_evidence.c and
 * tests/ref/test_prior_sensitivity.py. */
#include "tf_test.h"

#include <math.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "compare/compare.h"
#include "compare/pareto.h"
#include "compare/sensitivity.h"
#include "export/table.h"
#include "tables/sensitivity_table.h"

#define LN_2 0.69314718055994531
#define MEANLOG_K 5.0
#define SDLOG_K 1.5

static void set_prior(tf_prior_set *set, const char *name, tf_prior_kind kind, double a, double b, double lo, double hi)
{
    tf_prior p;
    double par[3] = {a, b, 0};
    ck_assert_int_eq(tf_prior_init(&p, kind, par, lo, hi, NULL), TF_OK);
    ck_assert_int_eq(tf_prior_set_assign(set, name, &p, NULL), TF_OK);
}

/* r ~ Normal(0, 0.5) (exponential) or half-normal(1) on (0, 5); K ~ log-normal(5, 1.5);
 * sigma ~ half-normal(0.5). */
static tf_status priors(void *ctx, tf_model *m, const tf_series *s, tf_prior_set **out, tf_error *err)
{
    (void)ctx;
    (void)s;
    size_t n = tf_model_n_params(m);
    const char *names[TF_MAX_PARAMS];
    double lo[TF_MAX_PARAMS], hi[TF_MAX_PARAMS];
    for (size_t i = 0; i < n; i++) {
        names[i] = tf_model_param_name(m, i);
        lo[i] = tf_model_param_lower(m, i);
        hi[i] = tf_model_param_upper(m, i);
    }
    tf_status st = tf_prior_set_new(n, names, lo, hi, out, err);
    if (st != TF_OK)
        return st;
    int expo = !strcmp(tf_model_growth(m)->name, "exponential");
    for (size_t i = 0; i < n; i++) {
        if (!strcmp(names[i], "r"))
            expo ? set_prior(*out, "r", TF_PRIOR_NORMAL, 0, 0.5, -INFINITY, INFINITY)
                 : set_prior(*out, "r", TF_PRIOR_HALFNORMAL, 1, 0, 0, 5);
        else if (!strcmp(names[i], "K"))
            set_prior(*out, "K", TF_PRIOR_LOGNORMAL, MEANLOG_K, SDLOG_K, 0, INFINITY);
        else
            set_prior(*out, names[i], TF_PRIOR_HALFNORMAL, 0.5, 0, 0, INFINITY);
    }
    return TF_OK;
}

/* One comparison of exponential and Ricker with Poisson counts on a simulated Ricker survey,
 * made once per test (each test runs in its own process). */
static tf_comparison *compare(void)
{
    tf_model *m = NULL;
    ck_assert_int_eq(tf_model_new("ricker", "poisson", &m, NULL), TF_OK);
    double theta[3] = {0.5, 150, 0.1}, x[25], y[25];
    tf_rng rng;
    uint64_t key = tf_rng_key("sensitivity survey");
    tf_rng_derive(&rng, 3, &key, 1);
    ck_assert_int_eq(tf_model_simulate(m, theta, log(40.0), NULL, 25, &rng, x, y, NULL), TF_OK);
    tf_model_free(m);
    tf_series *s = tf_series_new("sim", 2000, 25, y, NULL, NULL, NULL);
    ck_assert_ptr_nonnull(s);
    static const char *const growth[] = {"exponential", "ricker"}, *const obs[] = {"poisson"};
    tf_compare_options o = tf_compare_default_options();
    o.growth = growth;
    o.n_growth = 2;
    o.obs = obs;
    o.n_obs = 1;
    o.priors = priors;
    o.fit.n_chains = 2;
    o.fit.thin = 1;
    o.fit.min_iter = o.fit.max_iter = tf_test_valgrind() ? 150 : 500;
    o.fit.n_warmup = tf_test_valgrind() ? 150 : 500;
    o.evidence.n_draws = tf_test_valgrind() ? 200 : 800;
    o.evidence.n_adapt_draws = 100;
    o.n_threads = 2;
    tf_comparison *c = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_msg(tf_compare_run(s, &o, NULL, &c, &err) == TF_OK, "%s", err.n_items ? err.items[0].what : "");
    ck_assert_uint_eq(tf_comparison_n_fitted(c), 2);
    return c;
}

static void free_compare(tf_comparison *c)
{
    tf_series *s = (tf_series *)tf_comparison_series(c);
    tf_comparison_free(c);
    tf_series_free(s);
}

static size_t index_of(const tf_comparison *c, const char *name)
{
    for (size_t i = 0; i < tf_comparison_n_models(c); i++)
        if (!strcmp(tf_comparison_name(c, i), name))
            return i;
    ck_abort_msg("no candidate %s", name);
    return 0;
}

/* The standard alternatives, the rows they change, and the prior ratio against the log-normal
 * densities written out: doubling sdlog s gives p'(K) / p(K) = exp(3 z^2 / 8) / 2 with
 * z = (ln K - meanlog) / s (the algebra of the two densities, to 1e-12). */
START_TEST(standard_alternatives_change_what_they_name)
{
    tf_comparison *c = compare();
    tf_sensitivity_alternative alt[TF_SENSITIVITY_MAX_ALTERNATIVES];
    size_t n = tf_sensitivity_standard(c, alt, TF_SENSITIVITY_MAX_ALTERNATIVES);
    ck_assert_uint_eq(n, 4);
    ck_assert_str_eq(alt[0].label, "K x0.5");
    ck_assert_str_eq(alt[1].label, "K x2");
    ck_assert_str_eq(alt[2].label, "all x0.5");
    ck_assert_str_eq(alt[3].label, "all x2");
    ck_assert_str_eq(alt[1].param, "K");
    ck_assert_str_eq(alt[3].param, "");
    ck_assert_uint_eq(tf_sensitivity_standard(c, alt, 3), 3);

    tf_sensitivity_options so = {0, tf_evidence_default_options()};
    tf_sensitivity *s = NULL;
    ck_assert_int_eq(tf_sensitivity_run(c, alt, n, &so, NULL, &s, NULL), TF_OK);
    ck_assert_uint_eq(tf_sensitivity_n_rows(s), 5);
    ck_assert_str_eq(tf_sensitivity_label(s, 0), "fitted");
    ck_assert_str_eq(tf_sensitivity_label(s, 2), "K x2");
    size_t e = index_of(c, "exponential+poisson"), r = index_of(c, "ricker+poisson");
    for (size_t i = 0; i < tf_comparison_n_models(c); i++) {
        const tf_sens_cell *c0 = tf_sensitivity_cell(s, 0, i);
        ck_assert(c0->log_ml == tf_comparison_evidence(c, i)->main.log_ml);
        ck_assert_double_eq_tol(c0->prob, tf_comparison_figures(c, i)->prob, 1e-12);
    }
    /* K x2 leaves the exponential model alone and changes Ricker. */
    const tf_sens_cell *ek = tf_sensitivity_cell(s, 2, e), *rk = tf_sensitivity_cell(s, 2, r);
    ck_assert(!ek->changed && ek->log_ml == tf_sensitivity_cell(s, 0, e)->log_ml);
    ck_assert(rk->changed && rk->log_ml != tf_sensitivity_cell(s, 0, r)->log_ml);
    ck_assert(isfinite(rk->log_ml_se) && rk->log_ml_se > 0 && isfinite(rk->pareto_k));
    /* "all" changes both. */
    ck_assert(tf_sensitivity_cell(s, 4, e)->changed && tf_sensitivity_cell(s, 4, r)->changed);
    for (size_t row = 0; row < 5; row++) {
        double p = tf_sensitivity_cell(s, row, e)->prob + tf_sensitivity_cell(s, row, r)->prob;
        ck_assert_double_eq_tol(p, 1.0, 1e-12);
        size_t b = tf_sensitivity_best(s, row);
        ck_assert(b == e || b == r);
    }
    double lo, hi;
    int changes;
    tf_sensitivity_range(s, &lo, &hi, &changes);
    ck_assert(lo <= hi && lo > 0 && hi <= 1);
    /* The ratio Ricker's draws are reweighted by. */
    for (double K = 20; K < 5000; K *= 3) {
        double theta[3] = {0.5, K, 0.1}, z = (log(K) - MEANLOG_K) / SDLOG_K;
        ck_assert_double_eq_tol(tf_sensitivity_log_ratio(s, 2, r, theta), -LN_2 + 3.0 / 8.0 * z * z, 1e-12);
        ck_assert_double_eq_tol(tf_sensitivity_log_ratio(s, 1, r, theta), LN_2 - 1.5 * z * z, 1e-12);
        ck_assert(tf_sensitivity_log_ratio(s, 0, r, theta) == 0 && tf_sensitivity_log_ratio(s, 2, e, theta) == 0);
    }
    tf_sensitivity_free(s);
    free_compare(c);
}
END_TEST

/* A user's set of priors: the fitted ones again change nothing; a failing callback is reported
 * with the alternative's label; a bad factor is refused. */
static tf_status same_priors(void *ctx, const tf_model *m, const tf_series *s, const tf_prior_set *fitted,
                             tf_prior_set **out, tf_error *err)
{
    (void)ctx;
    (void)m;
    (void)s;
    return tf_prior_set_copy(fitted, out, err);
}

static tf_status failing_priors(void *ctx, const tf_model *m, const tf_series *s, const tf_prior_set *fitted,
                                tf_prior_set **out, tf_error *err)
{
    (void)ctx;
    (void)m;
    (void)s;
    (void)fitted;
    *out = NULL;
    return tf_error_add(err, TF_ERR_INVALID, "alt/ricker.ini", 7, 0, NULL, "a made-up problem");
}

START_TEST(user_alternatives)
{
    tf_comparison *c = compare();
    tf_sensitivity_alternative alt = {"as fitted", "", 0, same_priors, NULL};
    tf_sensitivity_options so = {0, tf_evidence_default_options()};
    tf_sensitivity *s = NULL;
    ck_assert_int_eq(tf_sensitivity_run(c, &alt, 1, &so, NULL, &s, NULL), TF_OK);
    ck_assert(!tf_sensitivity_is_scale(s, 1) && tf_sensitivity_is_scale(s, 0));
    for (size_t i = 0; i < tf_comparison_n_models(c); i++) {
        ck_assert(!tf_sensitivity_cell(s, 1, i)->changed);
        ck_assert(tf_sensitivity_cell(s, 1, i)->log_ml == tf_sensitivity_cell(s, 0, i)->log_ml);
    }
    tf_sensitivity_free(s);
    tf_error err;
    tf_error_init(&err);
    alt.priors = failing_priors;
    snprintf(alt.label, sizeof alt.label, "broken");
    s = (tf_sensitivity *)&err;   /* must be set to NULL */
    ck_assert_int_eq(tf_sensitivity_run(c, &alt, 1, &so, NULL, &s, &err), TF_ERR_INVALID);
    ck_assert_ptr_null(s);
    ck_assert_int_eq(err.items[0].line, 7);
    ck_assert_ptr_nonnull(strstr(err.items[1].what, "'broken'"));
    tf_sensitivity_alternative bad = {"zero", "K", 0.0, NULL, NULL};
    tf_error_init(&err);
    ck_assert_int_eq(tf_sensitivity_run(c, &bad, 1, &so, NULL, &s, &err), TF_ERR_INVALID);
    free_compare(c);
}
END_TEST

/* Priors a hundred times narrower move the posterior far from where the importance draws lie:
 * reweighting cannot be trusted there (Pareto k above 0.7 or draws uncovered). Without refit the
 * row says so; with it the evidence is estimated again, the row's state says which. */
START_TEST(untrusted_rows_are_flagged_or_refitted)
{
    tf_comparison *c = compare();
    tf_sensitivity_alternative alt = {"all x0.01", "", 0.01, NULL, NULL};
    tf_sensitivity_options so = {0, tf_evidence_default_options()};
    so.evidence.n_draws = 400;
    so.evidence.n_adapt_draws = 100;
    so.evidence.n_threads = 2;
    tf_sensitivity *s = NULL;
    ck_assert_int_eq(tf_sensitivity_run(c, &alt, 1, &so, NULL, &s, NULL), TF_OK);
    size_t n_flagged = 0;
    for (size_t i = 0; i < tf_comparison_n_models(c); i++) {
        const tf_sens_cell *cell = tf_sensitivity_cell(s, 1, i);
        ck_assert(cell->state == TF_SENS_REWEIGHTED || cell->state == TF_SENS_UNRELIABLE ||
                  cell->state == TF_SENS_FAILED);
        if (cell->state != TF_SENS_REWEIGHTED) {
            n_flagged++;
            ck_assert(tf_sensitivity_note(s, 1, i)[0]);
        }
    }
    ck_assert_uint_gt(n_flagged, 0);
    tf_sensitivity_free(s);
    so.refit = 1;
    ck_assert_int_eq(tf_sensitivity_run(c, &alt, 1, &so, NULL, &s, NULL), TF_OK);
    size_t n_refit = 0;
    for (size_t i = 0; i < tf_comparison_n_models(c); i++) {
        const tf_sens_cell *cell = tf_sensitivity_cell(s, 1, i);
        if (cell->state == TF_SENS_REFITTED || (cell->state == TF_SENS_UNRELIABLE &&
                                                strstr(tf_sensitivity_note(s, 1, i), "estimated again"))) {
            n_refit++;
            ck_assert(isfinite(cell->log_ml) && cell->log_ml_se > 0);
        }
    }
    ck_assert_uint_eq(n_refit, n_flagged);
    tf_sensitivity_free(s);
    free_compare(c);
}
END_TEST

/* The table: its header without risks (compare), one row per fitted model and set of priors,
 * the numbers of the cells. */
START_TEST(table_holds_the_cells)
{
    tf_comparison *c = compare();
    tf_sensitivity_alternative alt[TF_SENSITIVITY_MAX_ALTERNATIVES];
    size_t n = tf_sensitivity_standard(c, alt, TF_SENSITIVITY_MAX_ALTERNATIVES);
    tf_sensitivity_options so = {0, tf_evidence_default_options()};
    tf_sensitivity *s = NULL;
    ck_assert_int_eq(tf_sensitivity_run(c, alt, n, &so, NULL, &s, NULL), TF_OK);
    tf_table *t = NULL;
    ck_assert_int_eq(tf_sensitivity_table(s, NULL, NULL, "sim", &t, NULL), TF_OK);
    static const char *const want[] = {"population", "alternative", "model", "status", "log_ml", "log_ml_mcse",
                                       "model_prob", "model_prob_mcse", "pareto_k", "draws_pareto_k", "note"};
    ck_assert_uint_eq(tf_table_n_columns(t), 11);
    for (size_t k = 0; k < 11; k++)
        ck_assert_str_eq(tf_table_header(t, k), want[k]);
    ck_assert_str_eq(tf_table_name(t), "prior-sensitivity");
    ck_assert_uint_eq(tf_table_n_rows(t), 5 * 2);
    size_t r = index_of(c, "ricker+poisson");
    /* Rows: block by block, models in the comparison's order. */
    size_t row = 2 * 2 + r;
    ck_assert_str_eq(tf_table_text(t, row, 1), "K x2");
    ck_assert_str_eq(tf_table_text(t, row, 2), "ricker+poisson");
    ck_assert(tf_table_number(t, row, 4) == tf_sensitivity_cell(s, 2, r)->log_ml);
    ck_assert(tf_table_number(t, row, 6) == tf_sensitivity_cell(s, 2, r)->prob);
    ck_assert(tf_table_number(t, row, 8) == tf_sensitivity_cell(s, 2, r)->pareto_k);
    tf_table_free(t);
    tf_sensitivity_free(s);
    free_compare(c);
}
END_TEST

static Suite *make_suite(void)
{
    gsl_set_error_handler_off();
    Suite *s = suite_create("sensitivity");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 120);
    tcase_add_test(tc, standard_alternatives_change_what_they_name);
    tcase_add_test(tc, user_alternatives);
    tcase_add_test(tc, untrusted_rows_are_flagged_or_refitted);
    tcase_add_test(tc, table_holds_the_cells);
    suite_add_tcase(s, tc);
    return s;
}
