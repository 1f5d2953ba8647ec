/* Forecasts from a fitted model, from the model average of the analysis, or from given values;
 * see forecast.h. */
#include "analysis/forecast.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "model/prior.h"
#include "sampler/pmmh.h"
#include "sampler/posterior.h"
#include "util/rng.h"

/* One population: what the view hands out, and what this module owns behind it. */
typedef struct {
    tf_forecast_pop view;
    tf_model *model;
    tf_prior_set *priors;
    tf_posterior *post;
    tf_fit *fit;
    double *x_last;              /* MODEL: each draw's latent log-abundance in the last year */
    tf_projection *own;          /* MODEL and FIXED */
    tf_scenario_set *scenarios;  /* MODEL and FIXED */
    tf_safe_removal safe;
    double theta[TF_MAX_PARAMS]; /* FIXED */
} pop_state;

struct tf_forecast {
    tf_forecast_options opt;
    pop_state *pops;
    size_t n_pops;
    tf_analysis *analysis;       /* AVERAGE */
    size_t n_ignored;
    const char *ignored[TF_FORECAST_MAX_FIXED];
};

tf_status tf_forecast_options_init(tf_forecast_options *o, tf_forecast_source source, tf_error *err)
{
    memset(o, 0, sizeof *o);
    o->source = source;
    o->start = NAN;
    return tf_analysis_options_init(&o->run, err);
}

void tf_forecast_free(tf_forecast *f)
{
    if (!f)
        return;
    for (size_t i = 0; f->pops && i < f->n_pops; i++) {
        pop_state *p = &f->pops[i];
        tf_projection_free(p->own);
        tf_scenario_set_free(p->scenarios);
        free(p->x_last);
        tf_fit_free(p->fit);
        tf_posterior_free(p->post);
        tf_prior_set_free(p->priors);
        tf_model_free(p->model);
    }
    free(f->pops);
    tf_analysis_free(f->analysis);
    free(f);
}

/* A callee's failure while a population is set up from the input, as forecast.h says (the
 * fit command's judgement too): memory and interruption stay, anything else is an input that
 * cannot be used. */
static tf_status input_failure(tf_error *err, size_t from, tf_status st)
{
    return st == TF_ERR_NOMEM || st == TF_ERR_INTERRUPTED ? st : tf_error_restatus(err, from, TF_ERR_INVALID);
}

/* ---- fixed values ------------------------------------------------------------------------------ */

static int growth_has(const tf_growth_type *g, const char *name)
{
    for (size_t j = 0; j < g->n_params; j++)
        if (!strcmp(g->param_names[j], name))
            return 1;
    return 0;
}

static int obs_has(const tf_obs_type *o, const char *name)
{
    for (size_t j = 0; o && j < o->n_params; j++)
        if (!strcmp(o->param_names[j], name))
            return 1;
    return 0;
}

/* "exponential (r, sigma), ricker (r, K, sigma), ..." for hints; as many models as fit. */
static void growth_models_with_params(char *buf, size_t size)
{
    size_t used = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < tf_model_n_growth(); i++) {
        const tf_growth_type *g = tf_model_growth_at(i);
        char item[96];
        size_t n = (size_t)snprintf(item, sizeof item, "%s (", g->name);
        for (size_t j = 0; j < g->n_params && n < sizeof item; j++)
            n += (size_t)snprintf(item + n, sizeof item - n, "%s, ", g->param_names[j]);
        if (n < sizeof item)
            snprintf(item + n, sizeof item - n, "sigma)");
        if (used + strlen(item) + 3 > size)
            break;
        used += (size_t)snprintf(buf + used, size - used, "%s%s", i ? ", " : "", item);
    }
}

/* The growth model the fixed values describe: o->growth if given, else the only model whose
 * drift parameters are exactly the names given (besides sigma and counting-error parameters). */
static const tf_growth_type *pick_growth(const tf_forecast_options *o, const tf_obs_type *obs, tf_error *err)
{
    char known[256], hint[300];
    growth_models_with_params(known, sizeof known);
    snprintf(hint, sizeof hint, "known models: %s", known);
    if (o->growth) {
        const tf_growth_type *g = tf_model_find_growth(o->growth);
        if (!g)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown growth model '%s'", o->growth);
        return g;
    }
    size_t n_drift = 0;
    for (size_t i = 0; i < o->n_fixed; i++)
        n_drift += strcmp(o->fixed_names[i], "sigma") && !obs_has(obs, o->fixed_names[i]);
    const tf_growth_type *found = NULL;
    size_t n_match = 0;
    for (size_t i = 0; i < tf_model_n_growth(); i++) {
        const tf_growth_type *g = tf_model_growth_at(i);
        int all = g->n_params == n_drift;
        for (size_t j = 0; all && j < o->n_fixed; j++)
            if (strcmp(o->fixed_names[j], "sigma") && !obs_has(obs, o->fixed_names[j]))
                all = growth_has(g, o->fixed_names[j]);
        if (all && n_match++ == 0)
            found = g;
    }
    if (n_match == 1)
        return found;
    snprintf(hint, sizeof hint, "choose one with --model; known models: %s", known);
    tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s growth model takes exactly the parameters given to --parameter",
                 n_match ? "more than one" : "no");
    return NULL;
}

/* Places the fixed values into theta in m's order (drift parameters, sigma, counting error).
 * Every drift parameter and sigma must be given; counting-error values do not enter a
 * projection and are kept only as given (NAN where not), their names listed in ignored (room
 * for TF_FORECAST_MAX_FIXED; may be NULL). sigma = 0 is allowed: a projection without noise. */
static tf_status fixed_theta(const tf_model *m, const tf_forecast_options *o, double *theta, const char **ignored,
                             size_t *n_ignored, tf_error *err)
{
    const tf_growth_type *g = tf_model_growth(m);
    size_t n_params = tf_model_n_params(m), i_sigma = tf_model_sigma_index(m);
    unsigned char given[TF_MAX_PARAMS] = {0};
    for (size_t k = 0; k < n_params; k++)
        theta[k] = NAN;
    tf_status st = TF_OK;
    char takes[160] = "";
    for (size_t j = 0, used = 0; j < g->n_params && used < sizeof takes; j++)
        used += (size_t)snprintf(takes + used, sizeof takes - used, "%s, ", g->param_names[j]);
    for (size_t i = 0; i < o->n_fixed; i++) {
        int k = tf_model_param_index(m, o->fixed_names[i]);
        if (k < 0) {
            char hint[200];
            snprintf(hint, sizeof hint, "it takes %sand sigma", takes);
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "the %s model has no parameter '%s'", g->name,
                              o->fixed_names[i]);
            continue;
        }
        theta[k] = o->fixed_values[i];
        given[k] = 1;
        if ((size_t)k > i_sigma && ignored)
            ignored[(*n_ignored)++] = o->fixed_names[i];
    }
    for (size_t k = 0; k <= i_sigma; k++) {
        const char *name = tf_model_param_name(m, k);
        if (!given[k]) {
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--parameter does not give %s, which the %s model needs",
                              name, g->name);
        } else if (k < i_sigma && !(theta[k] > g->lower[k] && theta[k] < g->upper[k])) {
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--parameter %s = %g is outside the %s model's range (%g, %g)",
                              name, theta[k], g->name, g->lower[k], g->upper[k]);
        } else if (k == i_sigma && !(theta[k] >= 0)) {
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "0 projects without noise",
                              "--parameter sigma = %g must be 0 or more", theta[k]);
        }
    }
    return st;
}

/* The joined model of a fixed forecast: the growth model the values describe, with the
 * counting-error model named (it only lays out the parameters; without a name any will do,
 * and Poisson has no parameters to give). NULL with the reason in err. */
static tf_model *fixed_model(const tf_forecast_options *o, tf_error *err)
{
    const tf_obs_type *obs = NULL;
    if (o->obs && !(obs = tf_model_find_obs(o->obs))) {
        char known[256], hint[300];
        tf_model_list_obs(known, sizeof known);
        snprintf(hint, sizeof hint, "known models: %s", known);
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown counting-error model '%s'", o->obs);
        return NULL;
    }
    const tf_growth_type *g = pick_growth(o, obs, err);
    tf_model *m = NULL;
    if (g)
        tf_model_new(g->name, obs ? obs->name : "poisson", &m, err);
    return m;
}

/* ---- checks -------------------------------------------------------------------------------------- */

static void check_name(const char *what, const char *name, int growth, tf_error *err)
{
    if (growth ? tf_model_find_growth(name) != NULL : tf_model_find_obs(name) != NULL)
        return;
    char known[256], hint[300];
    if (growth)
        tf_model_list_growth(known, sizeof known);
    else
        tf_model_list_obs(known, sizeof known);
    snprintf(hint, sizeof hint, "known models: %s", known);
    tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown %s model '%s'", what, name);
}

/* The sampler's settings, as tf_pmmh_run checks them when it starts. */
static void check_sampler(const tf_pmmh_options *f, size_t n_threads, tf_error *err)
{
    if (f->n_chains < 1 || f->n_chains > TF_FIT_MAX_CHAINS)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%zu chains: give 1 to %d", f->n_chains,
                     TF_FIT_MAX_CHAINS);
    if (n_threads < 1)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "no thread to run on");
    if (f->n_warmup < 20)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "a warm-up of %zu iterations: give 20 or more", f->n_warmup);
    if (f->thin < 1 || f->min_iter < f->thin || f->max_iter < f->min_iter || f->max_kept < 8 || !(f->min_ess > 0))
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                     "thinning <= minimum iterations <= maximum, >= 8 kept draws, ESS target > 0",
                     "unusable run length");
}

tf_status tf_forecast_check_options(const tf_forecast_options *o, tf_error *err)
{
    size_t n0 = err->n_items + err->n_dropped;
    switch (o->source) {
    case TF_FORECAST_FIXED: {
        tf_model *m = fixed_model(o, err);
        double theta[TF_MAX_PARAMS];
        if (m)
            fixed_theta(m, o, theta, NULL, NULL, err);
        tf_model_free(m);
        break;
    }
    case TF_FORECAST_MODEL:
        if (!o->growth || !o->obs)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "a forecast from one model needs its growth and "
                         "counting-error model");
        if (o->growth)
            check_name("growth", o->growth, 1, err);
        if (o->obs)
            check_name("counting-error", o->obs, 0, err);
        break;
    case TF_FORECAST_AVERAGE:
        for (size_t i = 0; i < o->run.n_growth && i < TF_ANALYSIS_MAX_NAMES; i++)
            check_name("growth", o->run.growth[i], 1, err);
        for (size_t i = 0; !o->run.obs_auto && i < o->run.n_obs && i < TF_ANALYSIS_MAX_NAMES; i++)
            check_name("counting-error", o->run.obs[i], 0, err);
        break;
    default:
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "nothing to project from");
        break;
    }
    if (o->source == TF_FORECAST_MODEL || o->source == TF_FORECAST_AVERAGE) {
        check_sampler(&o->run.fit, o->run.n_threads, err);
        if (!o->run.priors)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "no priors for the fits");
    }
    if (o->run.n_scenarios && tf_scenario_check_list(o->run.scenarios, o->run.n_scenarios, err) == TF_OK) {
        /* A capacity on a growth model without one is refused before any fit. */
        size_t n_growth = o->source == TF_FORECAST_AVERAGE ? (o->run.n_growth ? o->run.n_growth : tf_model_n_growth())
                          : o->source == TF_FORECAST_MODEL ? 1 : 0;
        for (size_t i = 0; i < n_growth; i++) {
            const tf_growth_type *g = o->source == TF_FORECAST_MODEL ? tf_model_find_growth(o->growth ? o->growth : "")
                                      : o->run.n_growth ? tf_model_find_growth(o->run.growth[i])
                                                        : tf_model_growth_at(i);
            if (g && tf_scenario_check_model(o->run.scenarios, o->run.n_scenarios, g, err) != TF_OK)
                break;
        }
    }
    if (o->run.safe.years > 0 && o->run.project.n_thresholds == 0)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give a threshold with --threshold",
                     "the largest safe removal needs a quasi-extinction threshold");
    if (o->run.safe.years > o->run.project.horizon)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "ask within the projected years, or project further with --years",
                     "--safe-removal: %zu years is beyond the %zu projected years", o->run.safe.years,
                     o->run.project.horizon);
    size_t n1 = err->n_items;
    if (tf_project_check_options(&o->run.project, err) != TF_OK)
        tf_error_restatus(err, n1, TF_ERR_USAGE);
    if (!isnan(o->start) && !(o->start > 0 && log(o->start) <= TF_PROJECT_LOG_MAX && log(o->start) >= TF_PROJECT_LOG_MIN))
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "the current abundance must be > 0 and below 5e21");
    return err->n_items + err->n_dropped > n0 ? TF_ERR_USAGE : TF_OK;
}

/* ---- the three sources --------------------------------------------------------------------------- */

/* Calendar year of the last year of the series: where a posterior's latent starts lie. */
static int last_year(const tf_series *s)
{
    return tf_series_first_year(s) + (int)tf_series_n_years(s) - 1;
}

/* The population named, or every one (*only NULL); one is needed when need_one. */
static tf_status pick_populations(const tf_survey *sv, const char *population, int need_one, const char *why,
                                  const tf_series **only, tf_error *err)
{
    *only = NULL;
    /* A survey of one unnamed population has nothing to find by name. */
    if (population && !population[0])
        population = NULL;
    if (population && !(*only = tf_survey_find(sv, population)))
        return tf_error_add(err, TF_ERR_USAGE, tf_survey_path(sv), 0, 0,
                            "run 'tallyfit check' on the file to list its populations", "no population named '%s'",
                            population);
    if (!*only && need_one) {
        if (tf_survey_n_series(sv) != 1)
            return tf_error_add(err, TF_ERR_USAGE, tf_survey_path(sv), 0, 0, "choose one population",
                                "the survey holds %zu populations; %s", tf_survey_n_series(sv), why);
        *only = tf_survey_series(sv, 0);
    }
    return TF_OK;
}

/* The start of a fixed forecast from the survey (or o->start) and the calendar year of t = 0:
 * the last year with a count (rows listed after it without one add nothing to start from). */
static tf_status fixed_start(const tf_forecast_options *o, const tf_series *s, pop_state *p, tf_error *err)
{
    const double *counts = tf_series_counts(s);
    size_t last = tf_series_n_years(s);
    while (last > 0 && isnan(counts[last - 1]))
        last--;
    if (last == 0)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "give the current abundance with --start N",
                            "population '%s' has no surveyed count to start from", p->view.label);
    last--;
    p->view.year0 = tf_series_first_year(s) + (int)last;
    if (!isnan(o->start)) {
        p->view.start = o->start;
        return TF_OK;
    }
    double y = counts[last], e = tf_series_effort(s)[last];
    if (!(y > 0))
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "give the current abundance with --start N",
                            "the last surveyed count (in %d) is 0, and a projection on the log scale cannot "
                            "start from zero", p->view.year0);
    p->view.start = y / e;
    p->view.start_count = y;
    p->view.start_effort = e;
    return TF_OK;
}

/* Projects population p from in: the status quo (the survey's recorded removals continued), then
 * the scenarios and the safe removal from the same stream state (common random numbers). */
static tf_status project_managed(const tf_forecast_options *o, pop_state *p, const tf_project_input *in,
                                 tf_project_options po, tf_rng *rng, tf_error *err)
{
    const tf_series *s = p->view.series;
    double q = s ? tf_series_counted_fraction(s) : 1.0;
    if (s) {
        p->view.status_quo = tf_scenario_status_quo_animals(s, &p->view.status_quo_years);
        po.status_quo.take = q * p->view.status_quo;
    }
    tf_rng start = *rng;
    tf_status st = tf_project_run(in, 1, &po, rng, &p->own, err);
    p->view.projection = p->own;
    if (st == TF_OK && o->run.n_scenarios) {
        st = tf_scenario_set_run(in, 1, &po, &start, o->run.scenarios, o->run.n_scenarios, p->view.year0, q,
                                 &p->scenarios, err);
        p->view.scenarios = p->scenarios;
    }
    if (st == TF_OK && o->run.safe.years > 0 &&
        (st = tf_safe_removal_find(in, 1, &po, &start, &o->run.safe, q, &p->safe, err)) == TF_OK)
        p->view.safe = &p->safe;
    return st;
}

/* The checks of the scenarios of o against model g (NULL: none) and the start year of p. */
static tf_status check_management(const tf_forecast_options *o, const tf_growth_type *g, int year0, tf_error *err)
{
    tf_status st = TF_OK;
    if (o->run.n_scenarios && g)
        st = tf_scenario_check_model(o->run.scenarios, o->run.n_scenarios, g, err);
    if (st == TF_OK)
        st = tf_scenario_check_years(o->run.scenarios, o->run.n_scenarios, year0, o->run.project.horizon, err);
    return st;
}

static tf_status run_fixed(tf_forecast *f, const tf_survey *sv, tf_error *err)
{
    const tf_forecast_options *o = &f->opt;
    if (!sv && isnan(o->start))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                            "without a survey file, the current abundance (--start N) is required");
    const tf_series *s = NULL;
    tf_status st;
    if (sv && (st = pick_populations(sv, o->run.population, 1, "fixed values describe one", &s, err)) != TF_OK)
        return st;
    if (!(f->pops = calloc(1, sizeof *f->pops)))
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    f->n_pops = 1;
    pop_state *p = &f->pops[0];
    p->view = (tf_forecast_pop){.series = s, .label = s ? tf_series_label(s) : "", .year0 = TF_PROJECTION_NO_YEAR,
                                .theta = p->theta, .start = o->start, .start_count = NAN, .start_effort = NAN,
                                .converged = 1};
    if (!(p->model = fixed_model(o, err)))
        return tf_error_status(err) ? tf_error_status(err) : TF_ERR_NOMEM;
    p->view.model = p->model;
    if ((st = fixed_theta(p->model, o, p->theta, f->ignored, &f->n_ignored, err)) != TF_OK)
        return st;
    if (s && (st = fixed_start(o, s, p, err)) != TF_OK)
        return st;
    double x0 = log(p->view.start);
    tf_project_input in = tf_project_input_from_model(p->model, p->theta, 1, &x0, 1.0);
    /* Its own stream: fixed values have no posterior whose futures to share with the analysis. */
    uint64_t keys[2] = {tf_rng_key("forecast"), tf_rng_key(p->view.label)};
    tf_rng rng;
    tf_rng_derive(&rng, o->run.seed, keys, 2);
    tf_project_options po = o->run.project;
    po.start = 0; /* the start is the draw's own */
    if ((st = check_management(o, tf_model_growth(p->model), p->view.year0, err)) != TF_OK)
        return st;
    size_t n0 = err->n_items;
    st = project_managed(o, p, &in, po, &rng, err);
    /* Range and validity errors of the projection come from the values given (fixed, start). */
    if (st != TF_OK && st != TF_ERR_NOMEM && st != TF_ERR_NUMERIC && st != TF_ERR_INTERRUPTED)
        st = tf_error_restatus(err, n0, TF_ERR_USAGE);
    return st;
}

/* Model-checks of the counts, as the fit command's own (cmd/setup.c) but without the file's
 * name: the command checks first and names the line; this guards the callers that do not. */
static tf_status check_counts(const tf_model *m, const tf_series *s, tf_error *err)
{
    int zero;
    size_t i = tf_model_obs_unsuited(tf_model_obs(m), s, &zero);
    if (i == tf_series_n_years(s))
        return TF_OK;
    return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "count %g in year %d cannot be counted under the %s model",
                        tf_series_counts(s)[i], tf_series_first_year(s) + (int)i, tf_model_obs(m)->name);
}

/* Sets population p of a MODEL forecast up for its fit: model, first-year prior, priors,
 * posterior. */
static tf_status setup_model(const tf_forecast_options *o, pop_state *p, tf_error *err)
{
    tf_status st = tf_model_new(o->growth, o->obs, &p->model, err);
    if (st != TF_OK)
        return st;
    p->view.model = p->model;
    size_t n0 = err->n_items;
    if ((st = check_counts(p->model, p->view.series, err)) != TF_OK ||
        (st = tf_model_initial_from_series(p->model, p->view.series, err)) != TF_OK ||
        (st = o->run.priors(o->run.priors_ctx, p->model, p->view.series, &p->priors, err)) != TF_OK ||
        (st = tf_posterior_new(p->model, p->priors, &p->post, err)) != TF_OK)
        return input_failure(err, n0, st);
    return TF_OK;
}

/* Fits population p and projects its posterior: each draw starts from its own latent
 * log-abundance in the last year of the series (or from the start given). */
static tf_status fit_and_project(const tf_forecast_options *o, const volatile sig_atomic_t *stop, pop_state *p,
                                 tf_error *err)
{
    tf_pmmh_options opt = o->run.fit;
    opt.seed = o->run.seed;
    opt.n_threads = o->run.n_threads;
    tf_status st = tf_pmmh_run(p->post, p->view.series, &opt, stop, NULL, NULL, &p->fit, err);
    if (st != TF_OK)
        return st;
    p->view.fit = p->fit;
    p->view.converged = tf_fit_converged(p->fit);
    size_t nd = tf_fit_n_draws(p->fit);
    if (!(p->x_last = malloc(nd * sizeof *p->x_last)))
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for the projection");
    tf_fit_year_draws(p->fit, tf_fit_n_years(p->fit) - 1, p->x_last);
    tf_project_input in = tf_project_input_from_model(p->model, tf_fit_draws(p->fit), nd, p->x_last, 1.0);
    tf_project_options po = o->run.project;
    po.start = isnan(o->start) ? 0 : o->start;
    po.stop = stop;
    tf_rng rng;
    tf_project_stream(&rng, o->run.seed, p->view.label);
    return project_managed(o, p, &in, po, &rng, err);
}

static tf_status run_model(tf_forecast *f, const tf_survey *sv, const volatile sig_atomic_t *stop,
                           tf_analysis_progress_fn progress, void *progress_ctx, tf_error *err)
{
    const tf_forecast_options *o = &f->opt;
    const tf_series *only;
    tf_status st = pick_populations(sv, o->run.population, !isnan(o->start),
                                    "a start gives the abundance of one", &only, err);
    if (st != TF_OK)
        return st;
    size_t n = only ? 1 : tf_survey_n_series(sv);
    if (!(f->pops = calloc(n, sizeof *f->pops)))
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    f->n_pops = n;
    /* Every population is set up before the first long run, so that a bad count in the last one
     * is reported at once. */
    for (size_t i = 0; i < n; i++) {
        pop_state *p = &f->pops[i];
        const tf_series *s = only ? only : tf_survey_series(sv, i);
        p->view = (tf_forecast_pop){.series = s, .label = tf_series_label(s), .year0 = last_year(s), .start = NAN,
                                    .start_count = NAN, .start_effort = NAN};
        if ((st = setup_model(o, p, err)) != TF_OK ||
            (st = check_management(o, tf_model_growth(p->model), p->view.year0, err)) != TF_OK)
            return st;
    }
    for (size_t i = 0; i < n; i++) {
        pop_state *p = &f->pops[i];
        tf_analysis_event ev = {.stage = TF_ANALYSIS_STARTED, .population = i, .n_populations = n,
                                .label = p->view.label, .model = tf_model_name(p->model)};
        if (progress)
            progress(progress_ctx, &ev);
        if ((st = fit_and_project(o, stop, p, err)) != TF_OK)
            return st;
        ev.stage = TF_ANALYSIS_DONE;
        if (progress)
            progress(progress_ctx, &ev);
    }
    return TF_OK;
}

static tf_status run_average(tf_forecast *f, const tf_survey *sv, const volatile sig_atomic_t *stop,
                             tf_analysis_progress_fn progress, void *progress_ctx, tf_error *err)
{
    const tf_forecast_options *o = &f->opt;
    const tf_series *only;
    tf_status st = pick_populations(sv, o->run.population, !isnan(o->start),
                                    "a start gives the abundance of one", &only, err);
    if (st != TF_OK)
        return st;
    tf_analysis_options ao = o->run;
    ao.population = only ? tf_series_label(only) : NULL;
    /* A survey of one unnamed population has nothing to find by name. */
    if (ao.population && !ao.population[0])
        ao.population = NULL;
    if (!isnan(o->start))
        ao.project.start = o->start;
    if ((st = tf_analysis_run(sv, &ao, stop, progress, progress_ctx, &f->analysis, err)) != TF_OK)
        return st;
    size_t n = tf_analysis_n_populations(f->analysis);
    if (!(f->pops = calloc(n, sizeof *f->pops)))
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    f->n_pops = n;
    for (size_t i = 0; i < n; i++) {
        const tf_analysis_pop *ap = tf_analysis_population(f->analysis, i);
        const tf_series *s = tf_analysis_pop_series(ap);
        int converged = 1;
        for (size_t k = 0; k < tf_analysis_pop_n_models(ap); k++) {
            const tf_analysis_model *m = tf_analysis_pop_model(ap, k);
            if (m->probability > 0 && !tf_fit_converged(m->fit))
                converged = 0;
        }
        f->pops[i].view = (tf_forecast_pop){.series = s, .label = tf_series_label(s), .year0 = last_year(s),
                                            .start = NAN, .start_count = NAN, .start_effort = NAN, .pop = ap,
                                            .projection = tf_analysis_pop_projection(ap), .converged = converged,
                                            .scenarios = tf_analysis_pop_scenarios(ap),
                                            .safe = tf_analysis_pop_safe_removal(ap)};
        f->pops[i].view.status_quo = tf_analysis_pop_status_quo(ap, &f->pops[i].view.status_quo_years);
    }
    return TF_OK;
}

tf_status tf_forecast_run(const tf_survey *sv, const tf_forecast_options *o, const volatile sig_atomic_t *stop,
                          tf_analysis_progress_fn progress, void *progress_ctx, tf_forecast **out, tf_error *err)
{
    *out = NULL;
    tf_status st = tf_forecast_check_options(o, err);
    if (st != TF_OK)
        return st;
    if (o->source != TF_FORECAST_FIXED && !sv)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give the survey file to fit",
                            "a forecast from a posterior fits the counts of a survey");
    tf_forecast *f = calloc(1, sizeof *f);
    if (!f)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    f->opt = *o;
    f->opt.run.project.stop = stop;
    switch (o->source) {
    case TF_FORECAST_FIXED: st = run_fixed(f, sv, err); break;
    case TF_FORECAST_MODEL: st = run_model(f, sv, stop, progress, progress_ctx, err); break;
    default: st = run_average(f, sv, stop, progress, progress_ctx, err); break;
    }
    if (st != TF_OK) {
        tf_forecast_free(f);
        return st;
    }
    *out = f;
    return TF_OK;
}

const tf_forecast_options *tf_forecast_options_of(const tf_forecast *f) { return &f->opt; }
size_t tf_forecast_n_populations(const tf_forecast *f) { return f->n_pops; }
const tf_forecast_pop *tf_forecast_population(const tf_forecast *f, size_t i)
{
    return i < f->n_pops ? &f->pops[i].view : NULL;
}
size_t tf_forecast_n_ignored(const tf_forecast *f) { return f->n_ignored; }
const char *tf_forecast_ignored(const tf_forecast *f, size_t i) { return i < f->n_ignored ? f->ignored[i] : NULL; }

int tf_forecast_all_converged(const tf_forecast *f)
{
    for (size_t i = 0; i < f->n_pops; i++)
        if (!f->pops[i].view.converged)
            return 0;
    return 1;
}

size_t tf_forecast_candidate_runs(const tf_forecast_pop *p, size_t i)
{
    if (!p->pop || i >= tf_analysis_pop_n_models(p->pop) || !(tf_analysis_pop_model(p->pop, i)->probability > 0))
        return 0;
    /* The projection's inputs are the candidates of positive probability, in candidate order
     * (analysis.c). */
    size_t input = 0;
    for (size_t k = 0; k < i; k++)
        input += tf_analysis_pop_model(p->pop, k)->probability > 0;
    return tf_projection_input_runs(tf_analysis_pop_projection(p->pop), input);
}
