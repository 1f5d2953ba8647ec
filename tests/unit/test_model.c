/* Unit tests for the model table, the joined model, the growth and observation kernels and
 * simulation. */
#include "tf_test.h"
#include <float.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_rng.h>

#include "analysis/analysis.h"
#include "compare/compare.h"
#include "model/model.h"
#include "survey/series.h"
#include "util/rng.h"

static tf_model *make(const char *g, const char *o)
{
    tf_model *m = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new(g, o, &m, &err), TF_OK);
    ck_assert_ptr_nonnull(m);
    return m;
}

/* The table itself, whatever it holds: adding a model (DEVELOPERS.md, "Adding a growth model")
 * must not break this test, so nothing here counts the rows or spells their list. The names the
 * other tests use must be there, every row must be found by its own name, names must be unique
 * and fit in a file name, and the printed lists must follow the table's order. */
static void check_rows(size_t n, const char *(*name_at)(size_t), const char *(*label_at)(size_t),
                       size_t (*n_params_at)(size_t), int (*found)(size_t), void (*list)(char *, size_t),
                       const char *const *used, size_t n_used)
{
    char want[512] = "", got[512];
    size_t w = 0;
    ck_assert_uint_gt(n, 0);
    for (size_t i = 0; i < n; i++) {
        const char *name = name_at(i);
        ck_assert_msg(name && *name && strlen(name) < 24, "row %zu: a name of 1 to 23 characters", i);
        ck_assert_msg(strspn(name, "abcdefghijklmnopqrstuvwxyz0123456789-") == strlen(name),
                      "'%s': names are lower case letters, digits and '-' (they name files and streams)", name);
        ck_assert_msg(label_at(i) && *label_at(i), "'%s' has no label", name);
        ck_assert_msg(n_params_at(i) < TF_MAX_PARAMS, "'%s' has too many parameters", name);
        ck_assert_msg(found(i), "'%s' is not found by its own name", name);
        for (size_t j = 0; j < i; j++)
            ck_assert_msg(strcmp(name, name_at(j)), "'%s' is in the table twice", name);
        w += (size_t)snprintf(want + w, sizeof want - w, "%s%s", i ? ", " : "", name);
        ck_assert_uint_lt(w, sizeof want);
    }
    /* The commands print the list from a buffer of 256 bytes (the hint of an unknown name). */
    ck_assert_msg(w < 256, "the list of names is %zu bytes: widen the buffers of tf_model_new and the commands", w);
    list(got, sizeof got);
    ck_assert_str_eq(got, want);
    for (size_t u = 0; u < n_used; u++) {
        size_t i = 0;
        while (i < n && strcmp(name_at(i), used[u]))
            i++;
        ck_assert_msg(i < n, "'%s', used throughout the tests, is not in the table", used[u]);
    }
}

static const char *g_name(size_t i) { return tf_model_growth_at(i)->name; }
static const char *g_label(size_t i) { return tf_model_growth_at(i)->label; }
static size_t g_n_params(size_t i) { return tf_model_growth_at(i)->n_params; }
static int g_found(size_t i) { return tf_model_find_growth(g_name(i)) == tf_model_growth_at(i); }
static const char *o_name(size_t i) { return tf_model_obs_at(i)->name; }
static const char *o_label(size_t i) { return tf_model_obs_at(i)->label; }
static size_t o_n_params(size_t i) { return tf_model_obs_at(i)->n_params; }
static int o_found(size_t i) { return tf_model_find_obs(o_name(i)) == tf_model_obs_at(i); }

/* The take before the growth step (model.h): ln(e^x - take), extinct at zero, and a take of 0
 * leaves the states bit for bit. */
START_TEST(take_and_extinction)
{
    double x[4] = {log(100.0), log(10.0), log(5.0), log(50.0)};
    double keep[4];
    memcpy(keep, x, sizeof x);
    tf_model_take(0.0, x, 4);
    ck_assert_mem_eq(x, keep, sizeof x);
    tf_model_take(10.0, x, 4);
    ck_assert_double_eq_tol(x[0], log(90.0), 1e-12);
    ck_assert_double_eq(x[1], TF_MODEL_LOG_EXTINCT); /* exactly nothing left */
    ck_assert_double_eq(x[2], TF_MODEL_LOG_EXTINCT); /* more taken than there was */
    ck_assert_double_eq_tol(x[3], log(40.0), 1e-12);
    tf_model_take(-20.0, x, 4);                      /* a release brings an extinct state back */
    ck_assert_double_eq_tol(x[1], log(20.0), 1e-9);

    /* Gompertz with an overshooting feedback (r / ln K > 2) would send a very negative state far
     * up; an extinct state stays extinct, a living one drifts as the growth row says. */
    const tf_growth_type *g = tf_model_find_growth("gompertz");
    double p[2] = {3.0, exp(1.0)};
    double y[2] = {TF_MODEL_LOG_EXTINCT, 0.5}, out[2], plain;
    g->drift(p, y + 1, &plain, 1);
    tf_model_drift_alive(g, p, y, out, 2);
    ck_assert_double_eq(out[0], TF_MODEL_LOG_EXTINCT);
    ck_assert_double_eq(out[1], plain);
    double raw;
    g->drift(p, y, &raw, 1);
    ck_assert(raw > 0); /* what the plain drift would have done */
}
END_TEST

START_TEST(table_lists_every_model)
{
    static const char *const growth[] = {"exponential", "ricker", "gompertz", "theta-logistic"};
    static const char *const obs[] = {"poisson", "lognormal", "negbin", "lognormal-int"};
    check_rows(tf_model_n_growth(), g_name, g_label, g_n_params, g_found, tf_model_list_growth, growth, 4);
    check_rows(tf_model_n_obs(), o_name, o_label, o_n_params, o_found, tf_model_list_obs, obs, 4);
    ck_assert_ptr_null(tf_model_find_growth("logistic"));
    ck_assert_ptr_null(tf_model_find_obs(NULL));
    ck_assert_ptr_null(tf_model_growth_at(tf_model_n_growth()));
    ck_assert_ptr_null(tf_model_obs_at(tf_model_n_obs()));
    /* The layers above hold names and candidates in fixed arrays: every pair of the table must fit
     * a comparison, and every name the analysis's lists, or "all" would be refused or cut short. */
    ck_assert_uint_le(tf_model_n_growth() * tf_model_n_obs(), TF_COMPARE_MAX_MODELS);
    ck_assert_uint_le(tf_model_n_growth(), TF_ANALYSIS_MAX_NAMES);
    ck_assert_uint_le(tf_model_n_obs(), TF_ANALYSIS_MAX_NAMES);
    /* A list cut short by its buffer stays a terminated string. */
    char buf[12];
    tf_model_list_obs(buf, sizeof buf);
    ck_assert_uint_eq(strlen(buf), sizeof buf - 1);
    ck_assert_int_eq(strncmp(buf, o_name(0), strlen(o_name(0)) < 11 ? strlen(o_name(0)) : 11), 0);
}
END_TEST

START_TEST(unknown_names_are_errors_with_hints)
{
    tf_model *m = (tf_model *)1;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new("rickr", "poisson", &m, &err), TF_ERR_INVALID);
    ck_assert_ptr_null(m);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "rickr"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "ricker"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new("ricker", "binomial", &m, &err), TF_ERR_INVALID);
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "negbin"));
}
END_TEST

START_TEST(parameter_layout)
{
    tf_model *m = make("theta-logistic", "negbin");
    static const char *const names[] = {"r", "K", "theta", "sigma", "phi"};
    ck_assert_uint_eq(tf_model_n_params(m), 5);
    for (size_t i = 0; i < 5; i++) {
        ck_assert_str_eq(tf_model_param_name(m, i), names[i]);
        ck_assert_int_eq(tf_model_param_index(m, names[i]), (int)i);
    }
    ck_assert_int_eq(tf_model_param_index(m, "tau"), -1);
    ck_assert_uint_eq(tf_model_sigma_index(m), 3);
    ck_assert_str_eq(tf_model_name(m), "theta-logistic+negbin");
    ck_assert_ptr_null(tf_model_param_name(m, 5));
    ck_assert_double_eq(tf_model_param_lower(m, 3), 0.0);
    ck_assert(isinf(tf_model_param_upper(m, 3)));
    ck_assert_double_eq(tf_model_x1_mean(m), 0.0);
    ck_assert_double_eq(tf_model_x1_sd(m), 1.0);
    tf_model_set_initial(m, 4.0, 0.5);
    ck_assert_double_eq(tf_model_x1_mean(m), 4.0);
    ck_assert_double_eq(tf_model_x1_sd(m), 0.5);
    tf_model_free(m);

    m = make("exponential", "poisson");
    ck_assert_uint_eq(tf_model_n_params(m), 2);
    ck_assert_uint_eq(tf_model_sigma_index(m), 1);
    tf_model_free(m);
    tf_model_free(NULL);
}
END_TEST

START_TEST(parameter_ranges)
{
    tf_model *m = make("gompertz", "lognormal");
    tf_error err;
    tf_error_init(&err);
    double ok[] = {0.5, 200.0, 0.1, 0.2};
    ck_assert_int_eq(tf_model_check_params(m, ok, &err), TF_OK);
    double bad_k[] = {0.5, 0.9, 0.1, 0.2}; /* Gompertz needs K > 1 */
    ck_assert_int_eq(tf_model_check_params(m, bad_k, &err), TF_ERR_RANGE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "K = 0.9"));
    double bad_nan[] = {0.5, 200.0, NAN, 0.2};
    ck_assert_int_eq(tf_model_check_params(m, bad_nan, NULL), TF_ERR_RANGE);
    double bad_tau[] = {0.5, 200.0, 0.1, 0.0};
    ck_assert_int_eq(tf_model_check_params(m, bad_tau, NULL), TF_ERR_RANGE);
    double bad_r[] = {-0.1, 200.0, 0.1, 0.2}; /* density-dependent models need r > 0 */
    ck_assert_int_eq(tf_model_check_params(m, bad_r, NULL), TF_ERR_RANGE);
    tf_model_free(m);
    m = make("exponential", "poisson");
    double decline[] = {-0.3, 0.1}; /* exponential growth: any real r */
    ck_assert_int_eq(tf_model_check_params(m, decline, NULL), TF_OK);
    tf_model_free(m);
}
END_TEST

START_TEST(initial_prior_from_series)
{
    tf_error err;
    tf_error_init(&err);
    double y[] = {NAN, 10, NAN, 0, 30, 1000};
    double e[] = {1, 2, 1, 1, 3, 1};
    /* Span starts at the first surveyed year; the leading NAN is only in our array. */
    tf_series *s = tf_series_new("a", 2001, 5, y + 1, e + 1, NULL, &err);
    ck_assert_ptr_nonnull(s);
    tf_model *m = make("ricker", "poisson");
    ck_assert_int_eq(tf_model_initial_from_series(m, s, &err), TF_OK);
    /* First three surveyed: 10/2, 0 -> 0.5/1, 30/3; the 1000 is not used. */
    ck_assert_double_eq_tol(tf_model_x1_mean(m), log((5.0 + 0.5 + 10.0) / 3.0), 1e-15);
    ck_assert_double_eq(tf_model_x1_sd(m), 1.0);
    tf_series_free(s);
    double one[] = {42};
    s = tf_series_new("b", 2001, 1, one, NULL, NULL, &err);
    ck_assert_int_eq(tf_model_initial_from_series(m, s, &err), TF_OK);
    ck_assert_double_eq_tol(tf_model_x1_mean(m), log(42.0), 1e-15);
    tf_series_free(s);
    tf_model_free(m);
}
END_TEST

/* The drift kernels against the model equations, written out here independently of the model
 * files. Every growth model of the table must have its equation here: a new model fails this
 * test until its row is added (DEVELOPERS.md, "Adding a growth model"). */
/* Dennis, Munholland & Scott 1991, Ecol. Monogr. 61:115. */
static double eq_exponential(const double *p, double x) { return x + p[0]; }
/* Ricker 1954, J. Fish. Res. Board Can. 11:559, on the log scale (Dennis & Taper 1994). */
static double eq_ricker(const double *p, double x) { return x + p[0] * (1.0 - exp(x) / p[1]); }
/* Dennis, Ponciano, Lele, Taper & Staples 2006, Ecol. Monogr. 76:323, eq. 1. */
static double eq_gompertz(const double *p, double x) { return x + p[0] * (1.0 - x / log(p[1])); }
/* Gilpin & Ayala 1973, PNAS 70:3590, on the log scale (Sibly et al. 2005, Science 309:607). */
static double eq_theta_logistic(const double *p, double x) { return x + p[0] * (1.0 - pow(exp(x) / p[1], p[2])); }

static const struct {
    const char *name;
    double p[4];
    double (*eq)(const double *p, double x);
    double rel_tol; /* pow and exp of large arguments lose a few more digits than the others */
} drift_equations[] = {
    {"exponential", {-0.2}, eq_exponential, 1e-14},
    {"ricker", {0.7, 900.0}, eq_ricker, 1e-12},
    {"gompertz", {0.7, 900.0}, eq_gompertz, 1e-12},
    {"theta-logistic", {0.7, 900.0, 2.5}, eq_theta_logistic, 1e-11},
};

START_TEST(drift_kernels_follow_their_equations)
{
    double x[] = {-3.0, 0.0, 1.5, 4.2, 6.9, 9.0, 12.0};
    enum { N = sizeof x / sizeof x[0] };
    const size_t n_eq = sizeof drift_equations / sizeof drift_equations[0];
    for (size_t gi = 0; gi < tf_model_n_growth(); gi++) {
        const tf_growth_type *g = tf_model_growth_at(gi);
        size_t e = 0;
        while (e < n_eq && strcmp(drift_equations[e].name, g->name))
            e++;
        ck_assert_msg(e < n_eq, "growth model '%s' has no equation in drift_equations (tests/unit/test_model.c)",
                      g->name);
        const double *p = drift_equations[e].p;
        double out[N], y[N];
        g->drift(p, x, out, N);
        for (int i = 0; i < N; i++) {
            double want = drift_equations[e].eq(p, x[i]);
            ck_assert_msg(fabs(out[i] - want) <= drift_equations[e].rel_tol * fmax(1.0, fabs(want)),
                          "%s at x = %g: %.17g, the equation gives %.17g", g->name, x[i], out[i], want);
        }
        /* In place (out == x) is allowed. */
        memcpy(y, x, sizeof y);
        g->drift(p, y, y, N);
        for (int i = 0; i < N; i++)
            ck_assert_double_eq(y[i], out[i]);
    }
}
END_TEST

/* theta = 1 must be the Ricker kernel operation for operation, so that the filter gives
 * bit-identical estimates (tested in test_filter.c). Long enough to use the vector loop. */
START_TEST(theta_one_is_ricker_bit_for_bit)
{
    enum { N = 1003 };
    static double x[N], a[N], b[N];
    for (int i = 0; i < N; i++)
        x[i] = -5.0 + 15.0 * i / N;
    double pr[] = {0.9, 1234.5}, pt[] = {0.9, 1234.5, 1.0};
    tf_model_find_growth("ricker")->drift(pr, x, a, N);
    tf_model_find_growth("theta-logistic")->drift(pt, x, b, N);
    ck_assert_int_eq(memcmp(a, b, sizeof a), 0);
}
END_TEST

/* Reads tests/data/obs_density.csv (scipy.stats values, see tests/ref/test_obs_density.py). */
typedef struct {
    char model[16];
    double param, y, mu, logp;
} density_row;

static size_t read_table(density_row *rows, size_t max)
{
    FILE *f = fopen(TF_TEST_DATA("obs_density.csv"), "r");
    ck_assert_msg(f != NULL, "cannot open tests/data/obs_density.csv");
    char line[256];
    size_t n = 0;
    while (fgets(line, sizeof line, f)) {
        if (line[0] == '#' || !strncmp(line, "model,", 6))
            continue;
        ck_assert_uint_lt(n, max);
        density_row *r = &rows[n];
        char *tok = strtok(line, ",");
        snprintf(r->model, sizeof r->model, "%s", tok);
        r->param = strtod(strtok(NULL, ","), NULL);
        r->y = strtod(strtok(NULL, ","), NULL);
        r->mu = strtod(strtok(NULL, ","), NULL);
        r->logp = strtod(strtok(NULL, ",\n"), NULL);
        n++;
    }
    fclose(f);
    return n;
}

/* Agreement within 1e-9 absolute plus 1e-11 relative, plus what scipy's own rounding allows:
 * - 2e-14 times the size S = (y + phi) ln(y + phi + 1) of the ln-gamma terms that cancel
 *   (gammaln's relative error at large arguments);
 * - for the negative binomial, y eps (phi + mu) / mu: scipy forms ln(1 - p) from the rounded
 *   p = phi / (phi + mu), whose error eps/2 becomes eps / (2 (1 - p)) relative in 1 - p (seen at
 *   phi = 1e4, mu = 1e-3: scipy is 6.7e-10 y off a cancellation-free evaluation, we 1e-11).
 * -inf must match exactly. */
static void assert_close(double got, double want, const density_row *r, const char *what)
{
    if (isinf(want)) {
        ck_assert_msg(got == want, "%s %s(%g) y=%g mu=%g: got %.17g, scipy %.17g", what, r->model, r->param, r->y,
                      r->mu, got, want);
        return;
    }
    double size = r->y + r->param, tol = 1e-9 + 1e-11 * fabs(want) + 2e-14 * size * log(size + 1.0);
    if (!strcmp(r->model, "negbin") && r->mu > 0)
        tol += r->y * DBL_EPSILON * (r->param + r->mu) / r->mu;
    ck_assert_msg(fabs(got - want) <= tol, "%s %s(%g) y=%g mu=%g: got %.17g, scipy %.17g", what, r->model,
                  r->param, r->y, r->mu, got, want);
}

START_TEST(densities_match_scipy)
{
    static density_row rows[1000];
    size_t n = read_table(rows, 1000);
    ck_assert_uint_ge(n, 300);
    size_t n_checked[3] = {0, 0, 0};
    for (size_t i = 0; i < n; i++) {
        const density_row *r = &rows[i];
        const tf_obs_type *o = tf_model_find_obs(r->model);
        ck_assert_ptr_nonnull(o);
        double p[1] = {r->param};
        assert_close(o->logpmf(p, r->y, r->mu), r->logp, r, "logpmf");
        /* The vector kernel at several effort values, mu = effort * exp(x), in a vector long
         * enough for the vectorised loop and its remainder. */
        static const double efforts[] = {1.0, 2.5, 0.04};
        for (int k = 0; k < 3; k++) {
            enum { N = 37 };
            double x[N], lw[N], c[TF_OBS_MAX_CONST];
            double le = log(efforts[k]);
            for (int j = 0; j < N; j++) {
                x[j] = log(r->mu) - le;
                lw[j] = j; /* add_logweight adds to what is there */
            }
            o->year_const(p, r->y, c);
            o->add_logweight(p, r->y, le, c, x, lw, N);
            for (int j = 0; j < N; j++)
                assert_close(lw[j] - j, r->logp, r, "add_logweight");
        }
        n_checked[o == tf_model_find_obs("poisson") ? 0 : o == tf_model_find_obs("lognormal") ? 1 : 2]++;
    }
    for (int k = 0; k < 3; k++)
        ck_assert_uint_ge(n_checked[k], 50);
}
END_TEST

/* add_logweight equals logpmf element by element over a spread of states, including extinct
 * particles (x = -inf) and states far above the count. */
START_TEST(vector_kernel_equals_scalar_density)
{
    enum { N = 301 };
    static double x[N], lw[N];
    static const double ys[] = {0, 1, 3, 250, 9876};
    static const struct {
        const char *name;
        double p;
    } models[] = {{"poisson", 0}, {"lognormal", 0.25}, {"negbin", 3.5}, {"negbin", 5e5}, {"lognormal-int", 0.25}};
    const size_t n_models = sizeof models / sizeof models[0];
    /* Every counting-error model of the table has its row here: a new one fails by name until it has
     * one (DEVELOPERS.md, "Adding an observation model"). */
    for (size_t k = 0; k < tf_model_n_obs(); k++) {
        size_t mi = 0;
        while (mi < n_models && strcmp(models[mi].name, tf_model_obs_at(k)->name))
            mi++;
        ck_assert_msg(mi < n_models, "observation model '%s' has no row in vector_kernel_equals_scalar_density",
                      tf_model_obs_at(k)->name);
    }
    for (size_t mi = 0; mi < n_models; mi++) {
        const tf_obs_type *o = tf_model_find_obs(models[mi].name);
        double p[1] = {models[mi].p}, c[TF_OBS_MAX_CONST];
        for (size_t yi = 0; yi < sizeof ys / sizeof ys[0]; yi++) {
            double y = ys[yi], le = log(1.7);
            for (int i = 0; i < N; i++) {
                x[i] = i == 0 ? -INFINITY : -8.0 + 20.0 * i / N;
                lw[i] = 0.0;
            }
            o->year_const(p, y, c);
            o->add_logweight(p, y, le, c, x, lw, N);
            for (int i = 0; i < N; i++) {
                double want = o->logpmf(p, y, 1.7 * exp(x[i]));
                if (isinf(want))
                    ck_assert_msg(lw[i] == want, "%s y=%g x=%g: %g vs %g", o->name, y, x[i], lw[i], want);
                else
                    ck_assert_msg(fabs(lw[i] - want) <= 1e-9 + 1e-11 * fabs(want), "%s y=%g x=%g: %.17g vs %.17g",
                                  o->name, y, x[i], lw[i], want);
            }
        }
    }
}
END_TEST

/* Moments of the count draws. With n draws the sample mean has se sqrt(var / n) and the sample
 * variance se sqrt((m4 - var^2) / n) (large-sample variance of s^2, e.g. Kendall & Stuart 1977,
 * Advanced Theory of Statistics vol. 1, eq. 10.9), using the sample's own fourth moment; the
 * tolerances are 5 se. Targets: Poisson var = mu; NB2 var = mu + mu^2 / phi; log-normal:
 * ln y has mean ln mu and sd tau. */
static void draw_moments(const tf_obs_type *o, const double *p, double mu, int use_log, double want_mean,
                         double want_var, tf_rng *rng)
{
    enum { N = 40000 };
    static double v[N];
    gsl_rng view;
    tf_rng_gsl_view(rng, &view);
    double s = 0;
    for (int i = 0; i < N; i++) {
        double y = o->draw(p, mu, &view);
        if (o->needs_integer)
            ck_assert_double_eq(y, floor(y));
        ck_assert(y >= 0);
        v[i] = use_log ? log(y) : y;
        s += v[i];
    }
    double mean = s / N, m2 = 0, m4 = 0;
    for (int i = 0; i < N; i++) {
        double d = v[i] - mean;
        m2 += d * d;
        m4 += d * d * d * d;
    }
    m2 /= N - 1;
    m4 /= N;
    double se_mean = sqrt(m2 / N), se_var = sqrt((m4 - m2 * m2) / N);
    ck_assert_msg(fabs(mean - want_mean) < 5 * se_mean, "%s mu=%g: mean %g vs %g (se %g)", o->name, mu, mean,
                  want_mean, se_mean);
    ck_assert_msg(fabs(m2 - want_var) < 5 * se_var, "%s mu=%g: var %g vs %g (se %g)", o->name, mu, m2, want_var,
                  se_var);
}

/* The pseudo-observation of each counting-error model against the definition it claims: for the
 * count models, the mode of x -> l(x) = log p(y | e^(x + ln E)) (l'(mode) = 0 by a central
 * difference) and the precision -l''(mode) (second central difference, step 1e-4); for the
 * rounded log-normal, the mean and variance of x under the normalised likelihood P(y | x) (the
 * moment matching it claims), by a Riemann sum on a fine grid. Laplace's approximation: Tierney &
 * Kadane 1986, JASA 81:82. */
START_TEST(pseudo_observations_follow_their_definitions)
{
    static const double ys[] = {1, 3, 17, 412, 98765};
    static const double log_efforts[] = {0.0, 0.9162907318741551}; /* effort 1 and 2.5 */
    const double h = 1e-4;
    for (size_t k = 0; k < tf_model_n_obs(); k++) {
        const tf_obs_type *o = tf_model_obs_at(k);
        ck_assert_ptr_nonnull(o->pseudo_obs);
        const double p[] = {2.5}; /* phi or tau: a middling value */
        for (size_t i = 0; i < sizeof ys / sizeof ys[0]; i++)
            for (size_t e = 0; e < 2; e++) {
                const double y = ys[i], le = log_efforts[e];
                double mode = NAN, prec = NAN;
                int kind = o->pseudo_obs(p, y, le, &mode, &prec);
                ck_assert_int_ne(kind, TF_PSEUDO_NONE);
                ck_assert(isfinite(mode) && prec > 0);
                if (!strcmp(o->name, "lognormal-int")) {
                    double s0 = 0, s1 = 0, s2 = 0;
                    const double c = log(y) - le, dx = 1e-3;
                    for (double x = c - 40; x <= c + 40; x += dx) {
                        double w = exp(o->logpmf(p, y, exp(x + le)));
                        s0 += w;
                        s1 += w * x;
                        s2 += w * x * x;
                    }
                    double mean = s1 / s0, var = s2 / s0 - mean * mean;
                    /* Grid error of the moments: about dx^2 / 12 on the variance. */
                    ck_assert_double_eq_tol(mode, mean, 1e-6);
                    ck_assert_double_eq_tol(1.0 / prec, var, 1e-6 + 1e-6 * var);
                    ck_assert_int_eq(kind, TF_PSEUDO_APPROX);
                    continue;
                }
                double l0 = o->logpmf(p, y, exp(mode + le)), lp = o->logpmf(p, y, exp(mode + h + le)),
                       lm = o->logpmf(p, y, exp(mode - h + le));
                double d1 = (lp - lm) / (2 * h), d2 = (lp - 2 * l0 + lm) / (h * h);
                /* Rounding of the log-density (about 1e-16 (1 + |l| + y |x|)) over h, and h^2 times
                 * the third derivative (about y) for the first difference. */
                double round_err = 1e-15 * (1 + fabs(l0) + y * (1 + fabs(mode)));
                ck_assert_double_eq_tol(d1, 0.0, round_err / h + 1e-8 * y);
                ck_assert_double_eq_tol(prec, -d2, 1e-6 * prec + 4 * round_err / (h * h));
                ck_assert_int_eq(kind, strcmp(o->name, "lognormal") ? TF_PSEUDO_APPROX : TF_PSEUDO_EXACT);
            }
        /* A zero count carries no information of this form; nothing is written. */
        double mode = 7, prec = 7;
        ck_assert_int_eq(o->pseudo_obs(p, 0.0, 0.0, &mode, &prec), TF_PSEUDO_NONE);
        ck_assert(mode == 7 && prec == 7);
    }
}
END_TEST

/* The shared suitability rule: a fraction is looked for first (whole-count models), then a zero
 * (models that cannot count zero); every count suiting gives the number of years. */
START_TEST(unsuited_counts_are_found)
{
    const double y[] = {3, 0, 2.5, 4, NAN, 0};
    tf_error err;
    tf_error_init(&err);
    tf_series *s = tf_series_new("u", 2000, 6, y, NULL, NULL, &err);
    ck_assert_ptr_nonnull(s);
    int zero = -1;
    ck_assert_uint_eq(tf_model_obs_unsuited(tf_model_find_obs("poisson"), s, &zero), 2);
    ck_assert_int_eq(zero, 0);
    ck_assert_uint_eq(tf_model_obs_unsuited(tf_model_find_obs("lognormal"), s, &zero), 1);
    ck_assert_int_eq(zero, 1);
    const double w[] = {3, 1, 2, 4, NAN, 5};
    tf_series *t = tf_series_new("w", 2000, 6, w, NULL, NULL, &err);
    ck_assert_uint_eq(tf_model_obs_unsuited(tf_model_find_obs("negbin"), t, &zero), 6);
    ck_assert_uint_eq(tf_model_obs_unsuited(tf_model_find_obs("lognormal"), t, &zero), 6);
    tf_series_free(s);
    tf_series_free(t);
}
END_TEST

START_TEST(draws_have_the_model_moments)
{
    tf_rng rng;
    uint64_t key = 11;
    tf_rng_derive(&rng, 77, &key, 1);
    const tf_obs_type *po = tf_model_find_obs("poisson"), *ln = tf_model_find_obs("lognormal"),
                      *nb = tf_model_find_obs("negbin");
    double none[1] = {0}, tau[1] = {0.3}, phi[1] = {4.0};
    draw_moments(po, none, 3.2, 0, 3.2, 3.2, &rng);
    draw_moments(po, none, 850.0, 0, 850.0, 850.0, &rng);
    draw_moments(nb, phi, 60.0, 0, 60.0, 60.0 + 3600.0 / 4.0, &rng);
    draw_moments(nb, phi, 0.7, 0, 0.7, 0.7 + 0.49 / 4.0, &rng);
    draw_moments(ln, tau, 120.0, 1, log(120.0), 0.09, &rng);
    /* Beyond gsl_ran_poisson's unsigned range the normal approximation takes over: within
     * 6 sd of the mean. */
    gsl_rng view;
    tf_rng_gsl_view(&rng, &view);
    double big = 3e12, y = po->draw(none, big, &view);
    ck_assert(fabs(y - big) < 6 * sqrt(big));
    ck_assert_double_eq(y, floor(y));
    ck_assert_double_eq(po->draw(none, 0.0, &view), 0.0);
}
END_TEST

START_TEST(simulation_reproduces_and_scales)
{
    tf_model *m = make("ricker", "negbin");
    double theta[] = {0.8, 400.0, 0.15, 8.0};
    enum { T = 40 };
    double x1[T], y1[T], x2[T], y2[T], e[T];
    for (int t = 0; t < T; t++)
        e[t] = 0.5 + (t % 3);
    tf_rng a, b;
    uint64_t key = 5;
    tf_rng_derive(&a, 9, &key, 1);
    b = a;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_simulate(m, theta, log(50.0), e, T, &a, x1, y1, &err), TF_OK);
    ck_assert_int_eq(tf_model_simulate(m, theta, log(50.0), e, T, &b, x2, y2, &err), TF_OK);
    ck_assert_int_eq(memcmp(x1, x2, sizeof x1), 0);
    ck_assert_int_eq(memcmp(y1, y2, sizeof y1), 0);
    ck_assert_double_eq(x1[0], log(50.0));
    for (int t = 0; t < T; t++)
        ck_assert(y1[t] >= 0 && y1[t] == floor(y1[t]));
    tf_model_free(m);

    /* Exponential growth: the increments x[t+1] - x[t] have mean r and sd sigma; 5 se. */
    m = make("exponential", "poisson");
    enum { L = 3000 };
    static double xs[L], ys[L];
    double th[] = {0.002, 0.1};
    ck_assert_int_eq(tf_model_simulate(m, th, log(1000.0), NULL, L, &a, xs, ys, &err), TF_OK);
    double s = 0, ss = 0;
    for (int t = 0; t + 1 < L; t++) {
        double d = xs[t + 1] - xs[t];
        s += d;
        ss += d * d;
    }
    double mean = s / (L - 1), var = ss / (L - 1) - mean * mean;
    ck_assert(fabs(mean - 0.002) < 5 * 0.1 / sqrt(L - 1.0));
    ck_assert(fabs(var - 0.01) < 5 * 0.01 * sqrt(2.0 / (L - 1)));
    /* Overflow is an error, not inf counts. */
    double boom[] = {50.0, 0.1};
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_simulate(m, boom, log(10.0), NULL, 30, &a, xs, ys, &err), TF_ERR_NUMERIC);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "overflowed"));
    tf_model_free(m);

    /* The log-normal model cannot count zero animals. */
    m = make("exponential", "lognormal");
    double th2[] = {0.0, 0.1, 0.2};
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_simulate(m, th2, -800.0, NULL, 3, &a, xs, ys, &err), TF_ERR_NUMERIC);
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "poisson"));
    tf_model_free(m);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("model");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, table_lists_every_model);
    tcase_add_test(tc, unknown_names_are_errors_with_hints);
    tcase_add_test(tc, parameter_layout);
    tcase_add_test(tc, parameter_ranges);
    tcase_add_test(tc, initial_prior_from_series);
    tcase_add_test(tc, drift_kernels_follow_their_equations);
    tcase_add_test(tc, theta_one_is_ricker_bit_for_bit);
    tcase_add_test(tc, densities_match_scipy);
    tcase_add_test(tc, vector_kernel_equals_scalar_density);
    tcase_add_test(tc, pseudo_observations_follow_their_definitions);
    tcase_add_test(tc, unsuited_counts_are_found);
    tcase_add_test(tc, draws_have_the_model_moments);
    tcase_add_test(tc, simulation_reproduces_and_scales);
    tcase_add_test(tc, take_and_extinction);
    suite_add_tcase(s, tc);
    return s;
}
