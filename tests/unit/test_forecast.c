/* Unit tests for the forecast library (analysis/forecast.c): the fixed-value source reproduces
 * tf_project_run on the same draw and stream and follows the exponential growth law without
 * noise; the start of a fixed forecast comes from the last surveyed count per unit of effort;
 * the model-averaged source gives the analysis's projection of the same seed and population
 * digit for digit, and one model's posterior gives the projection of the average over that one
 * candidate (the shared stream, tf_project_stream); bad options and unusable priors are refused
 * before any fit, with the statuses the fit command gives for the same failures. */
#include "tf_test.h"

#include <math.h>
#include <string.h>

#include "analysis/analysis.h"
#include "analysis/forecast.h"
#include "model/prior.h"
#include "project/project.h"
#include "util/rng.h"

/* Two invented populations, 15 years each; the marsh has an effort column that varies. */
static const char two_pops[] =
    "population,year,count,effort\n"
    "lake,1995,152,1\nlake,1996,160,1\nlake,1997,141,1\nlake,1998,149,1\nlake,1999,170,1\n"
    "lake,2000,163,1\nlake,2001,158,1\nlake,2002,139,1\nlake,2003,147,1\nlake,2004,155,1\n"
    "lake,2005,166,1\nlake,2006,150,1\nlake,2007,144,1\nlake,2008,158,1\nlake,2009,161,1\n"
    "marsh,2000,64,1\nmarsh,2001,58,1\nmarsh,2002,71,1\nmarsh,2003,66,1\nmarsh,2004,60,1\n"
    "marsh,2005,55,1\nmarsh,2006,62,1\nmarsh,2007,57,1\nmarsh,2008,52,1\nmarsh,2009,59,1\n"
    "marsh,2010,54,1\nmarsh,2011,50,1\nmarsh,2012,56,1\nmarsh,2013,150,2\nmarsh,2014,NA,1\n";

static tf_survey *read_survey(const char *text)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    tf_status st = tf_survey_parse("test.csv", text, strlen(text), &sv, &err);
    if (st)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    return sv;
}

/* ---- priors built by hand, independent of the model files ---- */

typedef struct {
    int calls;
    const char *fail_for; /* a population label whose priors fail with TF_ERR_IO; NULL = none */
} prior_ctx;

static void set_prior(tf_prior_set *set, const char *name, tf_prior_kind kind, double a, double b, double lo,
                      double hi)
{
    tf_prior p;
    double par[3] = {a, b, 0};
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_prior_init(&p, kind, par, lo, hi, &err), TF_OK);
    ck_assert_int_eq(tf_prior_set_assign(set, name, &p, &err), TF_OK);
}

/* r ~ half-normal(1) on (0, 5), K ~ log-normal(ln 100, 1.5) above the model's bound, sigma ~
 * half-normal(0.5), phi ~ log-normal(2.3, 1.5): weakly informative, in the spirit of the model
 * files, for the growth models with r and K and the Poisson and negative-binomial counts. */
static tf_status hand_priors(void *ctx, tf_model *m, const tf_series *s, tf_prior_set **out, tf_error *err)
{
    prior_ctx *pc = ctx;
    pc->calls++;
    if (pc->fail_for && !strcmp(tf_series_label(s), pc->fail_for))
        return tf_error_add(err, TF_ERR_IO, "priors.ini", 0, 0, NULL, "cannot open the priors file");
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
    for (size_t i = 0; i < n; i++) {
        if (!strcmp(names[i], "r"))
            set_prior(*out, names[i], TF_PRIOR_HALFNORMAL, 1, 0, 0, 5);
        else if (!strcmp(names[i], "K"))
            set_prior(*out, names[i], TF_PRIOR_LOGNORMAL, log(100), 1.5, lo[i], INFINITY);
        else if (!strcmp(names[i], "sigma"))
            set_prior(*out, names[i], TF_PRIOR_HALFNORMAL, 0.5, 0, 0, INFINITY);
        else if (!strcmp(names[i], "phi"))
            set_prior(*out, names[i], TF_PRIOR_LOGNORMAL, 2.3, 1.5, 0, INFINITY);
    }
    return tf_prior_set_check_complete(*out, err);
}

/* Counts the stages a progress callback hears. */
typedef struct {
    int started, done;
} progress_count;

static void count_progress(void *ctx, const tf_analysis_event *e)
{
    progress_count *c = ctx;
    c->started += e->stage == TF_ANALYSIS_STARTED;
    c->done += e->stage == TF_ANALYSIS_DONE;
}

/* Options of source with short sampler runs: these tests check bookkeeping and streams, not
 * the posterior, so a few hundred iterations do. */
static tf_forecast_options short_options(tf_forecast_source source, prior_ctx *pc)
{
    tf_forecast_options o;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_forecast_options_init(&o, source, &err), TF_OK);
    tf_analysis_options *r = &o.run;
    if (source == TF_FORECAST_MODEL)
        r->fit = tf_pmmh_default_options();
    r->fit.n_chains = 2;
    r->fit.n_warmup = 200;
    r->fit.thin = 1;
    r->fit.min_iter = r->fit.max_iter = 200;
    r->fit.max_kept = 100;
    r->fit.n_particles = 40;
    r->evidence.n_draws = r->evidence.n_adapt_draws = 400;
    r->evidence.n_particles = 40;
    r->n_threads = 2;
    r->seed = 17;
    r->project.n_runs = 500;
    r->priors = hand_priors;
    r->priors_ctx = pc;
    return o;
}

/* Every number a projection reports, bit for bit. */
static int same_projection(const tf_projection *a, const tf_projection *b)
{
    size_t H = tf_projection_horizon(a);
    if (H != tf_projection_horizon(b) || tf_projection_n_runs(a) != tf_projection_n_runs(b) ||
        tf_projection_n_thresholds(a) != tf_projection_n_thresholds(b))
        return 0;
    for (size_t t = 0; t <= H; t++) {
        for (int q = 0; q < TF_BAND_COUNT; q++) {
            double u = tf_projection_band(a, t, (tf_band)q), v = tf_projection_band(b, t, (tf_band)q);
            if (memcmp(&u, &v, sizeof u))
                return 0;
        }
        for (size_t k = 0; k < tf_projection_n_thresholds(a); k++)
            if (tf_projection_risk(a, k, t) != tf_projection_risk(b, k, t))
                return 0;
    }
    for (size_t w = 0; w < tf_projection_n_windows(a); w++)
        for (size_t d = 0; d < tf_projection_n_declines(a); d++)
            if (tf_projection_decline_prob(a, w, d) != tf_projection_decline_prob(b, w, d))
                return 0;
    return 1;
}

static tf_forecast *run_ok(const tf_survey *sv, const tf_forecast_options *o)
{
    tf_error err;
    tf_error_init(&err);
    tf_forecast *f = NULL;
    tf_status st = tf_forecast_run(sv, o, NULL, NULL, NULL, &f, &err);
    if (st)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    ck_assert_ptr_nonnull(f);
    return f;
}

/* The status of a run that must fail, checking that nothing came back. */
static tf_status run_status(const tf_survey *sv, const tf_forecast_options *o, progress_count *pc)
{
    tf_error err;
    tf_error_init(&err);
    tf_forecast *f = (tf_forecast *)&err; /* must come back NULL */
    tf_status st = tf_forecast_run(sv, o, NULL, count_progress, pc, &f, &err);
    ck_assert_ptr_null(f);
    ck_assert_int_ne(st, TF_OK);
    ck_assert_int_eq(tf_error_status(&err), st);
    return st;
}

static void set_fixed(tf_forecast_options *o, const char *const *names, const double *values, size_t n)
{
    for (size_t i = 0; i < n; i++) {
        o->fixed_names[i] = names[i];
        o->fixed_values[i] = values[i];
    }
    o->n_fixed = n;
}

/* ---- fixed values ---- */

START_TEST(fixed_reproduces_project_run)
{
    tf_forecast_options o = short_options(TF_FORECAST_FIXED, NULL);
    o.growth = "ricker";
    o.obs = "negbin";
    static const char *const names[] = {"r", "K", "sigma", "phi"};
    static const double values[] = {0.3, 200, 0.2, 12};
    set_fixed(&o, names, values, 4);
    o.start = 80;
    o.run.project.horizon = 30;
    o.run.project.n_runs = 2000;
    tf_forecast *f = run_ok(NULL, &o);
    ck_assert_uint_eq(tf_forecast_n_populations(f), 1);
    const tf_forecast_pop *p = tf_forecast_population(f, 0);
    ck_assert_str_eq(p->label, "");
    ck_assert_ptr_null(p->series);
    ck_assert_int_eq(p->year0, TF_PROJECTION_NO_YEAR);
    ck_assert(p->converged && tf_forecast_all_converged(f));
    /* phi is a counting-error value: kept in theta, listed as ignored. */
    ck_assert_uint_eq(tf_forecast_n_ignored(f), 1);
    ck_assert_str_eq(tf_forecast_ignored(f, 0), "phi");

    /* The same draw projected directly, from the stream forecast.h names. */
    tf_error err;
    tf_error_init(&err);
    tf_model *m = NULL;
    ck_assert_int_eq(tf_model_new("ricker", "negbin", &m, &err), TF_OK);
    double theta[4] = {0.3, 200, 0.2, 12}, x0 = log(80);
    tf_project_input in = tf_project_input_from_model(m, theta, 1, &x0, 1.0);
    uint64_t keys[2] = {tf_rng_key("forecast"), tf_rng_key("")};
    tf_rng rng;
    tf_rng_derive(&rng, o.run.seed, keys, 2);
    tf_projection *direct = NULL;
    ck_assert_int_eq(tf_project_run(&in, 1, &o.run.project, &rng, &direct, &err), TF_OK);
    ck_assert(same_projection(p->projection, direct));
    for (size_t k = 0; k < 4; k++)
        ck_assert(p->theta[k] == theta[k]);
    /* Another seed gives other futures, so the comparison above can tell streams apart. */
    o.run.seed++;
    tf_forecast *g = run_ok(NULL, &o);
    ck_assert(!same_projection(tf_forecast_population(g, 0)->projection, direct));
    tf_forecast_free(g);
    tf_projection_free(direct);
    tf_model_free(m);
    tf_forecast_free(f);
}
END_TEST

START_TEST(fixed_without_noise_follows_exponential_law)
{
    /* Exponential growth without process noise: N_t = N_0 e^{r t} exactly (the exponential
     * growth law; common practice, no source). With r = -0.05 the abundance reaches half its
     * start at t = ln 2 / 0.05 = 13.86, so the risk of 50 % is 0 up to year 13 and 1 from 14. */
    tf_forecast_options o = short_options(TF_FORECAST_FIXED, NULL);
    static const char *const names[] = {"r", "sigma"};
    static const double values[] = {-0.05, 0};
    set_fixed(&o, names, values, 2);
    o.start = 500;
    o.run.project.horizon = 40;
    tf_forecast *f = run_ok(NULL, &o);
    const tf_forecast_pop *p = tf_forecast_population(f, 0);
    ck_assert_str_eq(tf_model_growth(p->model)->name, "exponential"); /* picked by the names */
    for (size_t t = 0; t <= 40; t++) {
        double want = 500 * exp(-0.05 * (double)t);
        /* log then exp on the way: a few units in the last place. */
        for (int q = 0; q < TF_BAND_COUNT; q++)
            ck_assert_msg(fabs(tf_projection_band(p->projection, t, (tf_band)q) - want) <= 1e-12 * want,
                          "t = %zu: %.17g, want %.17g", t, tf_projection_band(p->projection, t, (tf_band)q), want);
    }
    ck_assert_uint_eq(tf_projection_n_thresholds(p->projection), 3); /* 50 %, 20 %, 10 % */
    ck_assert(tf_projection_risk(p->projection, 0, 13) == 0);
    ck_assert(tf_projection_risk(p->projection, 0, 14) == 1);
    ck_assert(tf_projection_median_time(p->projection, 0) == 14);
    tf_forecast_free(f);
}
END_TEST

START_TEST(fixed_start_from_the_survey)
{
    tf_survey *sv = read_survey(two_pops);
    tf_forecast_options o = short_options(TF_FORECAST_FIXED, NULL);
    static const char *const names[] = {"r", "sigma"};
    static const double values[] = {0.01, 0.1};
    set_fixed(&o, names, values, 2);
    o.run.population = "marsh";
    tf_forecast *f = run_ok(sv, &o);
    const tf_forecast_pop *p = tf_forecast_population(f, 0);
    /* The last year with a count is 2013 (2014 has none): 150 animals for an effort of 2. */
    ck_assert_str_eq(p->label, "marsh");
    ck_assert_int_eq(p->year0, 2013);
    ck_assert(p->start == 75 && p->start_count == 150 && p->start_effort == 2);
    ck_assert(fabs(tf_projection_band(p->projection, 0, TF_BAND_MEDIAN) - 75) <= 1e-12 * 75);
    tf_forecast_free(f);

    /* Several populations and none named: which one is meant is the caller's to say. */
    o.run.population = NULL;
    progress_count pc = {0};
    ck_assert_int_eq(run_status(sv, &o, &pc), TF_ERR_USAGE);
    tf_survey_free(sv);

    /* A last count of 0 cannot start a projection on the log scale. */
    tf_survey *zero = read_survey("year,count\n2000,5\n2001,4\n2002,3\n2003,1\n2004,2\n2005,0\n");
    ck_assert_int_eq(run_status(zero, &o, &pc), TF_ERR_RANGE);
    o.start = 3; /* given, it is used instead */
    f = run_ok(zero, &o);
    ck_assert(tf_forecast_population(f, 0)->start == 3 && tf_forecast_population(f, 0)->year0 == 2005);
    ck_assert(isnan(tf_forecast_population(f, 0)->start_count));
    tf_forecast_free(f);
    tf_survey_free(zero);
}
END_TEST

/* ---- posteriors ---- */

START_TEST(average_is_the_analysis_projection)
{
    tf_survey *sv = read_survey(two_pops);
    prior_ctx pc = {0};
    tf_forecast_options o = short_options(TF_FORECAST_AVERAGE, &pc);
    static const char *const growth[] = {"gompertz", "ricker"}, *const obs[] = {"poisson"};
    o.run.n_growth = 2;
    o.run.growth[0] = growth[0];
    o.run.growth[1] = growth[1];
    o.run.n_obs = 1;
    o.run.obs[0] = obs[0];
    progress_count heard = {0};
    tf_error err;
    tf_error_init(&err);
    tf_forecast *f = NULL;
    ck_assert_int_eq(tf_forecast_run(sv, &o, NULL, count_progress, &heard, &f, &err), TF_OK);
    ck_assert_int_eq(heard.started, 2);
    ck_assert_int_eq(heard.done, 2);

    tf_analysis *a = NULL;
    ck_assert_int_eq(tf_analysis_run(sv, &o.run, NULL, NULL, NULL, &a, &err), TF_OK);
    ck_assert_uint_eq(tf_forecast_n_populations(f), 2);
    ck_assert_uint_eq(tf_analysis_n_populations(a), 2);
    for (size_t i = 0; i < 2; i++) {
        const tf_forecast_pop *p = tf_forecast_population(f, i);
        const tf_analysis_pop *ap = tf_analysis_population(a, i);
        ck_assert_str_eq(p->label, tf_series_label(tf_analysis_pop_series(ap)));
        ck_assert_int_eq(p->year0, i == 0 ? 2009 : 2014);
        ck_assert(same_projection(p->projection, tf_analysis_pop_projection(ap)));
        /* The futures given to each candidate add up to the projection's. */
        size_t runs = 0;
        int converged = 1;
        for (size_t k = 0; k < tf_analysis_pop_n_models(p->pop); k++) {
            runs += tf_forecast_candidate_runs(p, k);
            const tf_analysis_model *m = tf_analysis_pop_model(p->pop, k);
            if (m->probability > 0 && !tf_fit_converged(m->fit))
                converged = 0;
        }
        ck_assert_uint_eq(runs, tf_projection_n_runs(p->projection));
        ck_assert_int_eq(p->converged, converged);
    }
    /* The two populations have their own streams. */
    ck_assert(!same_projection(tf_forecast_population(f, 0)->projection, tf_forecast_population(f, 1)->projection));
    tf_analysis_free(a);
    tf_forecast_free(f);
    tf_survey_free(sv);
}
END_TEST

START_TEST(one_model_is_the_average_over_it)
{
    /* forecast --model M and the average over the one candidate M fit with the streams of a lone
     * fit and project from tf_project_stream(seed, label): the same futures digit for digit. */
    tf_survey *sv = read_survey(two_pops);
    prior_ctx pc = {0};
    tf_forecast_options om = short_options(TF_FORECAST_MODEL, &pc);
    om.growth = "gompertz";
    om.obs = "poisson";
    tf_forecast_options oa = short_options(TF_FORECAST_AVERAGE, &pc);
    oa.run.fit = om.run.fit;
    oa.run.n_growth = oa.run.n_obs = 1;
    oa.run.growth[0] = "gompertz";
    oa.run.obs[0] = "poisson";
    for (int with_start = 0; with_start < 2; with_start++) {
        /* With a start (a what-if) every run starts there: one population only. */
        om.start = oa.start = with_start ? 40 : NAN;
        om.run.population = oa.run.population = with_start ? "marsh" : NULL;
        tf_forecast *fm = run_ok(sv, &om), *fa = run_ok(sv, &oa);
        ck_assert_uint_eq(tf_forecast_n_populations(fm), with_start ? 1 : 2);
        ck_assert_uint_eq(tf_forecast_n_populations(fa), tf_forecast_n_populations(fm));
        for (size_t i = 0; i < tf_forecast_n_populations(fm); i++) {
            const tf_forecast_pop *pm = tf_forecast_population(fm, i), *pa = tf_forecast_population(fa, i);
            ck_assert_ptr_nonnull(pm->fit);
            ck_assert_ptr_null(pm->pop);
            ck_assert_str_eq(pm->label, pa->label);
            ck_assert_uint_eq(tf_fit_n_draws(pm->fit), tf_fit_n_draws(tf_analysis_pop_model(pa->pop, 0)->fit));
            ck_assert(same_projection(pm->projection, pa->projection));
            if (with_start)
                ck_assert(fabs(tf_projection_band(pm->projection, 0, TF_BAND_MEDIAN) - 40) <= 1e-12 * 40);
        }
        tf_forecast_free(fm);
        tf_forecast_free(fa);
    }
    tf_survey_free(sv);
}
END_TEST

/* ---- refusals ---- */

START_TEST(bad_options_are_refused_before_any_fit)
{
    tf_survey *sv = read_survey(two_pops);
    prior_ctx pc = {0};
    progress_count heard = {0};
    tf_forecast_options good = short_options(TF_FORECAST_MODEL, &pc);
    good.growth = "ricker";
    good.obs = "poisson";
    tf_forecast_options o;

    o = good;
    o.run.project.horizon = 0;
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_USAGE);
    o = good;
    o.growth = "logistic";
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_USAGE);
    o = good;
    o.run.fit.n_chains = 0;
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_USAGE);
    o = good;
    o.start = -3;
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_USAGE);
    o = good;
    o.start = 50; /* a start is one population's abundance */
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_USAGE);
    o = good;
    o.run.population = "nowhere";
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_USAGE);
    o = good;
    ck_assert_int_eq(run_status(NULL, &o, &heard), TF_ERR_USAGE); /* a posterior needs a survey */
    o = good;
    o.source = TF_FORECAST_NONE;
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_USAGE);
    o = good;
    o.source = TF_FORECAST_AVERAGE;
    o.run.n_growth = 1;
    o.run.growth[0] = "no-such-model";
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_USAGE);

    /* Fixed values: sigma missing, below 0, a drift parameter outside the model's range, a name
     * the model lacks, names that fit two growth models. */
    tf_forecast_options fx = short_options(TF_FORECAST_FIXED, NULL);
    fx.start = 100;
    static const char *const n1[] = {"r"}, *const n2[] = {"r", "sigma"}, *const n3[] = {"r", "K", "sigma"},
                             *const n4[] = {"r", "sigma", "theta"};
    static const double v1[] = {0.1}, v2[] = {0.1, -0.2}, v3[] = {0.1, -5, 0.1}, v4[] = {0.1, 0.1, 1};
    const char *const *names[] = {n1, n2, n3, n4};
    const double *values[] = {v1, v2, v3, v4};
    size_t n[] = {1, 2, 3, 3};
    const char *growth[] = {NULL, NULL, "ricker", "exponential"};
    for (size_t i = 0; i < 4; i++) {
        o = fx;
        o.growth = growth[i];
        set_fixed(&o, names[i], values[i], n[i]);
        tf_error err;
        tf_error_init(&err);
        ck_assert_int_eq(tf_forecast_check_options(&o, &err), TF_ERR_USAGE);
        ck_assert_int_eq(run_status(NULL, &o, &heard), TF_ERR_USAGE);
    }
    o = fx;
    set_fixed(&o, n3, (const double[]){0.1, 200, 0.1}, 3); /* ricker and gompertz both take r, K */
    ck_assert_int_eq(run_status(NULL, &o, &heard), TF_ERR_USAGE);
    o.growth = "gompertz";
    tf_forecast_free(run_ok(NULL, &o)); /* named, it runs */

    ck_assert_int_eq(pc.calls, 0);
    ck_assert_int_eq(heard.started, 0);
    tf_survey_free(sv);
}
END_TEST

START_TEST(unusable_priors_are_an_input_problem)
{
    /* A priors file that cannot be read, for the second population: every population is set up
     * before the first fit, so nothing is fitted, and the status is TF_ERR_INVALID (exit status
     * 3, as fit gives for the same file), whatever status the priors gave. */
    tf_survey *sv = read_survey(two_pops);
    prior_ctx pc = {.fail_for = "marsh"};
    progress_count heard = {0};
    tf_forecast_options o = short_options(TF_FORECAST_MODEL, &pc);
    o.growth = "gompertz";
    o.obs = "poisson";
    ck_assert_int_eq(run_status(sv, &o, &heard), TF_ERR_INVALID);
    ck_assert_int_eq(pc.calls, 2);
    ck_assert_int_eq(heard.started, 0);
    /* Counts the counting-error model cannot have (5.5 under Poisson, read as an estimate so
     * that the survey takes it): refused before the priors are built. */
    tf_survey_options so = {.estimates = 1};
    tf_survey *frac = NULL;
    tf_error err;
    tf_error_init(&err);
    static const char text[] = "year,count\n2000,5.5\n2001,4\n2002,3\n2003,6\n2004,2\n";
    ck_assert_int_eq(tf_survey_parse_with("frac.csv", text, strlen(text), &so, &frac, &err), TF_OK);
    pc.fail_for = NULL;
    pc.calls = 0;
    ck_assert_int_eq(run_status(frac, &o, &heard), TF_ERR_INVALID);
    ck_assert_int_eq(pc.calls, 0);
    ck_assert_int_eq(heard.started, 0);
    tf_survey_free(frac);
    tf_survey_free(sv);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("forecast");
    TCase *tc = tcase_create("forecast");
    tcase_set_timeout(tc, 300);
    tcase_add_test(tc, fixed_reproduces_project_run);
    tcase_add_test(tc, fixed_without_noise_follows_exponential_law);
    tcase_add_test(tc, fixed_start_from_the_survey);
    tcase_add_test(tc, average_is_the_analysis_projection);
    tcase_add_test(tc, one_model_is_the_average_over_it);
    tcase_add_test(tc, bad_options_are_refused_before_any_fit);
    tcase_add_test(tc, unusable_priors_are_an_input_problem);
    suite_add_tcase(s, tc);
    return s;
}
