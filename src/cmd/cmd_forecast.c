/* `tallyfit forecast`: projects a population forward and reports the abundance bands,
 * quasi-extinction risk and the chance of decline. Three sources of futures: the posterior of one
 * model fitted by PMMH (--model), the posteriors of the candidate models averaged by their
 * posterior probabilities (--average: the analysis of `tallyfit analyze`, without its workbook),
 * or parameter values given by hand (--fixed). */
#define _GNU_SOURCE
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "analysis/analysis.h"
#include "cmd/args.h"
#include "cmd/input.h"
#include "cmd/cmd.h"
#include "cmd/fileset.h"
#include "cmd/messages.h"
#include "cmd/setup.h"
#include "cmd/signals.h"
#include "export/csv_out.h"
#include "export/projection_tables.h"
#include "export/table.h"
#include "model/model.h"
#include "model/prior.h"
#include "project/cautions.h"
#include "project/project.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "sampler/posterior.h"
#include "survey/survey.h"
#include "util/rng.h"

#define CMD "forecast"
#define PROG "tallyfit " CMD
#define DEFAULT_THRESHOLDS "50%,20%,10%"
#define DEFAULT_SEED 1u
/* A limit that only guards memory and time against typos; tf_project_run's own. */
#define MAX_RUNS 10000000u
/* The three projection tables and the summary that says what was projected, with the cautions. */
#define SUMMARY_TABLE TF_PROJECTION_N_TABLES
#define N_TABLES (TF_PROJECTION_N_TABLES + 1)
#define SUMMARY_NAME "forecast_summary"

/* Where the futures come from. */
typedef enum { FROM_NONE, FROM_FIXED, FROM_MODEL, FROM_AVERAGE } source;

typedef struct {
    const char *survey_path;
    const char *model, *obs, *population, *out_dir;
    tf_input in;            /* --population list, --skip-unusable, --estimates; population = its single label */
    const char *thresholds;
    int average, quiet, have_fixed;
    tf_arg_pairs fixed;      /* --parameter */
    size_t years, runs, decline_window;
    double start;
    uint64_t seed;
    tf_args_sampler sampler; /* the sampler's options, as given */
    source from;
} options;

static void help(FILE *out)
{
    char growth[256], obs[256];
    tf_model_list_growth(growth, sizeof growth);
    tf_model_list_obs(obs, sizeof obs);
    tf_pmmh_options d = tf_pmmh_default_options();
    tf_analysis_options a;
    tf_error err;
    tf_error_init(&err);
    tf_analysis_options_init(&a, &err);
    fprintf(out,
            "usage: tallyfit forecast SURVEY.csv --model M [--obs O] [options]\n"
            "       tallyfit forecast SURVEY.csv --average [--model M,...] [--obs O,...] [options]\n"
            "       tallyfit forecast [SURVEY.csv] --parameter NAME=VALUE,... [--start N] [options]\n"
            "\n"
            "Simulates the population forward and reports the abundance bands, the risk of falling to or\n"
            "below a threshold (quasi-extinction) and the chance of decline, each with its Monte Carlo error.\n"
            "Give one source of futures:\n"
            "  --model M [--obs O]     fit growth model M with counting error O (default poisson;\n"
            "                          lognormal with --estimates) by\n"
            "                          particle MCMC, as 'tallyfit fit' does, and project from the\n"
            "                          posterior: each draw starts from its own latent abundance in the\n"
            "                          last survey year and runs on with its own parameters\n"
            "  --average               fit the candidate models, compare them by marginal likelihood and\n"
            "                          project averaging them by their posterior probabilities, as\n"
            "                          'tallyfit analyze' does (without the workbook). --model and --obs\n"
            "                          then take comma lists, or 'all', restricting the candidates\n"
            "                          (default exponential,ricker,gompertz with poisson,negbin for whole\n"
            "                          counts, lognormal otherwise)\n"
            "  --parameter r=..,sigma=..[,K=..]\n"
            "                          project from these parameter values (growth parameters and the\n"
            "                          process-noise sd sigma, natural scale); --model picks the growth\n"
            "                          model when the names leave a choice\n"
            "Without one of them the command stops with a usage error rather than start a fit of\n"
            "several minutes unasked.\n"
            "Growth models: %s.\n"
            "Counting error: %s.\n"
            "\n"
            "Projection:\n"
            "  --population LIST       only these populations, labels separated by commas (default:\n"
            "                          every one in the file; --parameter and --start need one)\n"
            "  --skip-unusable         leave out, with a warning, every population that cannot be fitted\n"
            "  --estimates             the counts are estimates that need not be whole numbers: only\n"
            "                          counting-error models of continuous amounts (lognormal) are fitted\n"
            "  --start N               current abundance. With --parameter: by default the last surveyed\n"
            "                          count / effort. With a posterior, a what-if: every draw starts from N\n"
            "                          instead of its latent abundance, keeping the uncertainty about the\n"
            "                          parameters and leaving out that about the current abundance\n"
            "  --years H               years to project (default %d)\n"
            "  --threshold LIST        abundances or percentages of the current abundance, e.g. 50,100,20%%\n"
            "                          (default %s)\n"
            "  --decline-window Y      also report declines over Y whole years (e.g. three generations,\n"
            "                          rounded); declines over 10 years are always reported\n"
            "  --runs R                simulated futures (default %d, or the number of posterior draws\n"
            "                          when that is more)\n"
            "  -o, --output DIR        where to write (default output/<survey name>/, or output/forecast/\n"
            "                          without a survey), with one sub-folder per population when the\n"
            "                          file has several, as fit does\n",
            growth, obs, TF_PROJECT_DEFAULT_HORIZON, DEFAULT_THRESHOLDS, TF_PROJECT_DEFAULT_RUNS);
    tf_args_quiet_help(out, 26);
    fputs("  -h, --help              show this help\n\n"
          "Fitting (--model, --average; --ml-se, --draws and --model-weights with --average only;\n"
          "--seed seeds the projection too, with --parameter as well):\n", out);
    tf_args_sampler_help(out, &d, &a.evidence, 26);
    fputs("\n"
          "Writes forecast_bands.csv (median, 50 % and 90 % bands per year), forecast_quasi_extinction.csv\n"
          "(the cumulative risk per threshold and year, with its Monte Carlo error),\n"
          "forecast_declines.csv, and forecast_summary.csv (what was projected: the model or the model\n"
          "probabilities, the posterior draws, the settings, and the cautions), all or none.\n"
          TF_CMD_HELP_END,
          out);
}

/* ---- fixed parameters --------------------------------------------------------------------------- */

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

/* The growth model the fixed values describe: --model if given, else the only model whose drift
 * parameters are exactly the names given (besides sigma and counting-error parameters). */
static const tf_growth_type *pick_growth(const options *o, const tf_obs_type *obs, tf_error *err)
{
    char known[256], hint[300];
    growth_models_with_params(known, sizeof known);
    snprintf(hint, sizeof hint, "known models: %s", known);
    if (o->model) {
        const tf_growth_type *g = tf_model_find_growth(o->model);
        if (!g)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown growth model '%s'", o->model);
        return g;
    }
    const tf_arg_pairs *nv = &o->fixed;
    size_t n_drift = 0;
    for (size_t i = 0; i < nv->n; i++)
        n_drift += strcmp(nv->items[i].name, "sigma") && !obs_has(obs, nv->items[i].name);
    const tf_growth_type *found = NULL;
    size_t n_match = 0;
    for (size_t i = 0; i < tf_model_n_growth(); i++) {
        const tf_growth_type *g = tf_model_growth_at(i);
        int all = g->n_params == n_drift;
        for (size_t j = 0; all && j < nv->n; j++)
            if (strcmp(nv->items[j].name, "sigma") && !obs_has(obs, nv->items[j].name))
                all = growth_has(g, nv->items[j].name);
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

/* Places the --fixed values into theta in m's order (drift parameters, sigma, counting error).
 * Every drift parameter and sigma must be given; counting-error values do not enter a
 * projection and are kept only as given (NAN where not). sigma = 0 is allowed: a projection
 * without noise. */
static tf_status fixed_theta(const tf_model *m, const tf_arg_pairs *nv, double *theta, int quiet, tf_error *err)
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
    for (size_t i = 0; i < nv->n; i++) {
        int k = tf_model_param_index(m, nv->items[i].name);
        if (k < 0) {
            char hint[200];
            snprintf(hint, sizeof hint, "it takes %sand sigma", takes);
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "the %s model has no parameter '%s'", g->name,
                              nv->items[i].name);
            continue;
        }
        theta[k] = nv->items[i].value;
        given[k] = 1;
        if ((size_t)k > i_sigma && !quiet)
            printf("note: %s (counting error) does not enter a projection; ignored\n", nv->items[i].name);
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

/* ---- one population's forecast ------------------------------------------------------------------ */

typedef struct {
    const tf_series *s;          /* NULL for a fixed forecast without a survey */
    const char *label;           /* "" = unnamed */
    char dir[4096];
    int year0;                   /* calendar year of year 0; TF_PROJECTION_NO_YEAR when unknown */
    double start;                /* --fixed: the start */
    double theta[TF_MAX_PARAMS]; /* --fixed: the values */
    tf_model *model;             /* --fixed and --model */
    tf_prior_set *priors;        /* --model */
    tf_posterior *post;
    tf_fit *fit;
    double *x_last;              /* --model: each draw's latent log-abundance in the last year */
    tf_projection *own;          /* --fixed and --model */
    const tf_projection *proj;   /* the projection reported: own, or the analysis's */
    const tf_analysis_pop *pop;  /* --average */
    tf_table *tables[N_TABLES];
} job;

static void job_clear(job *j)
{
    for (size_t k = 0; k < N_TABLES; k++)
        tf_table_free(j->tables[k]);
    tf_projection_free(j->own);
    free(j->x_last);
    tf_fit_free(j->fit);
    tf_posterior_free(j->post);
    tf_prior_set_free(j->priors);
    tf_model_free(j->model);
    memset(j, 0, sizeof *j);
}

/* The output folder of a population, as fit chooses it, so that a population's fit and forecast
 * land together: -o DIR or by default output/<survey>/, with /<population> below it when the file
 * holds several populations (even if one is chosen); output/forecast without a survey. A name
 * too long for the buffer is refused, not cut: a cut name would be another folder. */
static tf_status job_dir(const options *o, const tf_survey *sv, job *j, tf_error *err)
{
    char base[256] = "forecast";
    if (sv)
        tf_args_survey_name(o->survey_path, base, sizeof base);
    if (tf_args_output_dir(j->dir, sizeof j->dir, o->out_dir, base, j->label, sv && tf_survey_n_in_file(sv) > 1,
                           NULL) != TF_OK)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "choose a shorter -o DIR",
                            "the output folder name is longer than %zu bytes", sizeof j->dir - 1);
    return TF_OK;
}

/* Calendar year of the last year of the series: where a posterior's latent starts lie. */
static int last_year(const tf_series *s)
{
    return tf_series_first_year(s) + (int)tf_series_n_years(s) - 1;
}

/* 1 when the effort is not 1 in every surveyed year: abundances are then per unit of effort. */
static int per_effort(const tf_series *s)
{
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    for (size_t t = 0; t < tf_series_n_years(s); t++)
        if (!isnan(y[t]) && e[t] != 1)
            return 1;
    return 0;
}

/* The largest R-hat and the smallest bulk or tail ESS over a fit's parameters, NaN ranking
 * worst (tf_fit_health). */
static void fit_mixing(const tf_fit *f, double *rhat_max, double *ess_min)
{
    tf_fit_health_summary h = tf_fit_health(f);
    *rhat_max = h.max_rhat;
    *ess_min = h.min_ess;
}

/* 1 when every fit the projection draws from passed the convergence checks. */
static int job_converged(const options *o, const job *j)
{
    if (o->from == FROM_MODEL)
        return tf_fit_converged(j->fit);
    if (o->from == FROM_AVERAGE)
        for (size_t i = 0; i < tf_analysis_pop_n_models(j->pop); i++) {
            const tf_analysis_model *m = tf_analysis_pop_model(j->pop, i);
            if (m->probability > 0 && !tf_fit_converged(m->fit))
                return 0;
        }
    return 1;
}

static const char not_converged[] =
    "Some chains behind this projection did not pass the convergence checks (R-hat above 1.01 or an "
    "effective sample size below 400): the draws may not represent the posterior yet. Run longer "
    "(--iterations, --warmup) before relying on the numbers.";

/* Room for the general cautions and the three of a particular forecast. */
#define MAX_CAUTIONS 8

/* The cautions of a forecast: the general ones, then what this source of futures leaves out. */
static size_t cautions_for(const options *o, const job *j, const char **out)
{
    size_t n = 0;
    for (size_t i = 0; i < tf_project_n_cautions(); i++)
        out[n++] = tf_project_caution(i);
    if (o->from == FROM_FIXED)
        out[n++] = tf_project_caution_fixed();
    else if (!isnan(o->start))
        out[n++] = tf_project_caution_start();
    if (j && !job_converged(o, j))
        out[n++] = not_converged;
    return n;
}

/* The order of the candidates by posterior probability, highest first (stable). */
static void by_probability(const tf_analysis_pop *p, size_t *order)
{
    size_t n = tf_analysis_pop_n_models(p);
    for (size_t i = 0; i < n; i++) {
        size_t k = i;
        double pi = tf_analysis_pop_model(p, i)->probability;
        while (k > 0 && tf_analysis_pop_model(p, order[k - 1])->probability < pi) {
            order[k] = order[k - 1];
            k--;
        }
        order[k] = i;
    }
}

/* Simulated futures given to candidate i: the projection's inputs are the candidates of positive
 * probability, in candidate order (analysis.c). */
static size_t candidate_runs(const tf_analysis_pop *p, size_t i)
{
    size_t input = 0;
    for (size_t k = 0; k < i; k++)
        input += tf_analysis_pop_model(p, k)->probability > 0;
    return tf_analysis_pop_model(p, i)->probability > 0 ? tf_projection_input_runs(tf_analysis_pop_projection(p), input)
                                                         : 0;
}

/* ---- the summary table -------------------------------------------------------------------------- */

#define TRY(call)                \
    do {                         \
        if ((st = (call)) != TF_OK) \
            goto fail;           \
    } while (0)

static tf_status summary_table(const options *o, const job *j, tf_table **out, tf_error *err)
{
    tf_status st = TF_OK;
    char text[512], note[256];
    tf_table *t = tf_table_new_summary(SUMMARY_NAME, err);
    if (!t)
        return tf_error_status(err) ? tf_error_status(err) : TF_ERR_NOMEM;
    TRY(tf_table_add_heading(t, "Forecast", err));
    TRY(tf_table_add_item_text(t, "Survey", o->survey_path ? o->survey_path : "none", NULL, err));
    if (j->label[0])
        TRY(tf_table_add_item_text(t, "Population", j->label, NULL, err));
    if (o->in.estimates && o->from != FROM_FIXED)
        TRY(tf_table_add_item_text(t, "Counts", "read as estimates (--estimates), not whole counts",
                                   "so only counting-error models of continuous amounts (log-normal) were fitted",
                                   err));
    if (o->from == FROM_FIXED) {
        const tf_growth_type *g = tf_model_growth(j->model);
        TRY(tf_table_add_item_text(t, "Projected from", "fixed parameter values", "given with --parameter", err));
        TRY(tf_table_add_item_text(t, "Growth model", g->name, NULL, err));
        for (size_t k = 0; k <= g->n_params; k++)
            TRY(tf_table_add_item_number(t, tf_model_param_name(j->model, k), j->theta[k], TF_COL_NUMBER,
                                         k == g->n_params ? "process-noise sd" : NULL, err));
        snprintf(text, sizeof text, "%.10g", j->start);
        TRY(tf_table_add_item_text(t, "Start", text,
                                   isnan(o->start) ? "the last surveyed count / effort" : "given with --start", err));
    } else if (o->from == FROM_MODEL) {
        const tf_fit *f = j->fit;
        const tf_fit_settings *fs = tf_fit_settings_of(f);
        double rhat, ess;
        fit_mixing(f, &rhat, &ess);
        TRY(tf_table_add_item_text(t, "Projected from", "the posterior of one fitted model",
                                   "particle marginal Metropolis-Hastings", err));
        TRY(tf_table_add_item_text(t, "Model", tf_model_name(j->model), NULL, err));
        snprintf(note, sizeof note, "%zu chains x %zu kept draws, after %zu warm-up; %zu particles, %s proposal",
                 tf_fit_n_chains(f), tf_fit_n_iter(f), fs->n_warmup, fs->n_particles,
                 tf_filter_proposal_name(fs->proposal));
        TRY(tf_table_add_item_number(t, "Posterior draws", (double)tf_fit_n_draws(f), TF_COL_INTEGER, note, err));
        TRY(tf_table_add_item_number(t, "R-hat, largest", rhat, TF_COL_NUMBER, "want <= 1.01", err));
        if (!(rhat <= TF_FIT_RHAT_MAX))
            TRY(tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err));
        TRY(tf_table_add_item_number(t, "ESS, smallest", ess, TF_COL_NUMBER, "bulk or tail; want >= 400", err));
        if (!(ess >= TF_FIT_ESS_MIN))
            TRY(tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err));
    } else {
        const tf_analysis_pop *p = j->pop;
        size_t n = tf_analysis_pop_n_models(p), order[TF_ANALYSIS_MAX_MODELS];
        by_probability(p, order);
        TRY(tf_table_add_item_text(t, "Projected from", "the posterior model average of the fitted candidates",
                                   "each model's draws weighted by its posterior probability (marginal likelihood, "
                                   "equal prior weights)", err));
        for (size_t r = 0; r < n; r++) {
            const tf_analysis_model *m = tf_analysis_pop_model(p, order[r]);
            snprintf(text, sizeof text, "P(%s)", m->name);
            if (m->state == TF_CANDIDATE_FITTED) {
                const tf_candidate_figures *fg = tf_comparison_figures(tf_analysis_pop_comparison(p), order[r]);
                snprintf(note, sizeof note, "Monte Carlo se %.3g; %zu posterior draws; %zu simulated futures",
                         fg->prob_se, tf_fit_n_draws(m->fit), candidate_runs(p, order[r]));
                TRY(tf_table_add_item_number(t, text, m->probability, TF_COL_PROBABILITY, note, err));
            } else {
                TRY(tf_table_add_item_text(t, text, m->state == TF_CANDIDATE_FAILED ? "failed" : "excluded", m->note,
                                           err));
            }
        }
    }
    if (o->from != FROM_FIXED) {
        if (isnan(o->start))
            snprintf(text, sizeof text, "each posterior draw's latent abundance in the last survey year");
        else
            snprintf(text, sizeof text, "%.10g for every draw", o->start);
        TRY(tf_table_add_item_text(t, "Start", text, isnan(o->start) ? NULL : "given with --start (a what-if)", err));
    }
    if (j->year0 != TF_PROJECTION_NO_YEAR)
        TRY(tf_table_add_item_number(t, "Year 0", j->year0, TF_COL_YEAR, "the last survey year", err));
    TRY(tf_table_add_item_number(t, "Simulated futures", (double)tf_projection_n_runs(j->proj), TF_COL_INTEGER, NULL,
                                 err));
    TRY(tf_table_add_item_number(t, "Years ahead", (double)tf_projection_horizon(j->proj), TF_COL_INTEGER, NULL, err));
    snprintf(text, sizeof text, "%llu", (unsigned long long)o->seed);
    TRY(tf_table_add_item_text(t, "Seed", text, "the same seed gives the same numbers", err));
    /* The median time is one number per threshold, so it lives here rather than in the curves. */
    TRY(tf_table_add_heading(t, "Median time to quasi-extinction", err));
    for (size_t k = 0; k < tf_projection_n_thresholds(j->proj); k++) {
        tf_threshold th = tf_projection_threshold(j->proj, k);
        char label[48];
        snprintf(text, sizeof text, "Threshold %s", tf_project_threshold_label(&th, label, sizeof label));
        double mt = tf_projection_median_time(j->proj, k);
        if (isnan(mt)) {
            snprintf(note, sizeof note, "the risk stays below 0.5 within %zu years", tf_projection_horizon(j->proj));
            TRY(tf_table_add_item_text(t, text, "not reached", note, err));
        } else {
            TRY(tf_table_add_item_number(t, text, mt, TF_COL_INTEGER,
                                         "years ahead: the first year with a risk of 0.5 or more", err));
        }
    }
    TRY(tf_table_add_heading(t, "Cautions", err));
    const char *cautions[MAX_CAUTIONS];
    size_t nc = cautions_for(o, j, cautions);
    for (size_t i = 0; i < nc; i++) {
        snprintf(text, sizeof text, "Caution %zu", i + 1);
        TRY(tf_table_add_item_text(t, text, cautions[i], NULL, err));
    }
    *out = t;
    return TF_OK;
fail:
    tf_table_free(t);
    return st;
}

/* The projection tables and the summary, each projection table carrying this forecast's
 * cautions beyond the general ones as notes (for readers of the tables in memory; the summary
 * holds all of them in the CSV files). */
static tf_status build_tables(const options *o, job *j, tf_error *err)
{
    tf_status st = tf_projection_tables_build(j->proj, j->year0, j->tables, err);
    const char *cautions[MAX_CAUTIONS];
    size_t nc = cautions_for(o, j, cautions);
    for (size_t k = 0; k < TF_PROJECTION_N_TABLES && st == TF_OK; k++)
        for (size_t i = tf_project_n_cautions(); i < nc && st == TF_OK; i++)
            st = tf_table_add_note(j->tables[k], TF_NOTE_CAUTION, cautions[i], err);
    if (st == TF_OK)
        st = summary_table(o, j, &j->tables[SUMMARY_TABLE], err);
    return st;
}

/* Writes every population's tables as one group (fileset.h): either every file is
 * replaced or none is, and folders this call made are taken away again on failure. Signals wait
 * until the renames are over, so that a late Ctrl-C cannot stop the group half-way. */
static tf_status write_all(const job *jobs, size_t n_jobs, const char *survey_path, tf_error *err)
{
    tf_fileset *g = tf_fileset_new(n_jobs, n_jobs * N_TABLES, err);
    tf_status st = g ? TF_OK : TF_ERR_NOMEM;
    for (size_t i = 0; i < n_jobs && st == TF_OK; i++) {
        const job *j = &jobs[i];
        st = tf_fileset_mkdir(g, j->dir, err);
        for (size_t k = 0; k < N_TABLES && st == TF_OK; k++) {
            char name[128], path[4300];
            tf_csv_file_name(tf_table_name(j->tables[k]), name, sizeof name);
            snprintf(path, sizeof path, "%s/%s", j->dir, name);
            FILE *f;
            if ((st = tf_fileset_open(g, path, survey_path, &f, err)) != TF_OK)
                break;
            /* Write errors stay on the stream and are reported by the commit, with errno. */
            tf_csv_write_stream(j->tables[k], f, path, NULL);
        }
    }
    sigset_t old_mask;
    tf_signals_hold(&old_mask);
    st = tf_fileset_finish(g, st, err);
    tf_signals_release(&old_mask);
    return st;
}

/* ---- printing ------------------------------------------------------------------------------------ */

/* Prints text as an indented paragraph wrapped at about 78 columns. */
static void print_wrapped(FILE *out, const char *first, const char *text)
{
    const size_t width = 78;
    size_t indent = strlen(first), col = indent;
    fputs(first, out);
    while (*text) {
        size_t word = strcspn(text, " ");
        if (col > indent && col + 1 + word > width) {
            fprintf(out, "\n%*s", (int)indent, "");
            col = indent;
        } else if (col > indent) {
            fputc(' ', out);
            col++;
        }
        fwrite(text, 1, word, out);
        col += word;
        text += word;
        text += strspn(text, " ");
    }
    fputc('\n', out);
}

/* The cautions once for the whole run; the convergence caution when any population needs it. */
static void print_cautions(const options *o, const job *jobs, size_t n_jobs)
{
    const char *cautions[MAX_CAUTIONS];
    size_t n = cautions_for(o, NULL, cautions);
    for (size_t i = 0; i < n_jobs; i++)
        if (!job_converged(o, &jobs[i])) {
            cautions[n++] = not_converged;
            break;
        }
    if (o->quiet)
        return;
    fputs("\nCautions:\n", stdout);
    for (size_t i = 0; i < n; i++)
        print_wrapped(stdout, "  - ", cautions[i]);
}

/* What was projected: the source, the model(s), the posterior draws and the start. */
static void print_source(const options *o, const job *j)
{
    /* "Forecast for population 'east' from ..." */
    char who[300] = "";
    if (j->label[0])
        snprintf(who, sizeof who, " for population '%s'", j->label);
    if (o->from == FROM_FIXED) {
        const tf_growth_type *g = tf_model_growth(j->model);
        printf("Forecast%s from fixed parameters, growth model %s:", who, g->name);
        for (size_t k = 0; k <= g->n_params; k++)
            printf("%s %s = %g", k ? "," : "", tf_model_param_name(j->model, k), j->theta[k]);
        printf("\n  start N = %g%s\n", j->start, j->year0 == TF_PROJECTION_NO_YEAR ? "" : " in the last survey year");
        return;
    }
    const char *unit = per_effort(j->s) ? " per unit of effort" : "";
    size_t ny = tf_series_n_years(j->s);
    if (o->from == FROM_MODEL) {
        const tf_fit *f = j->fit;
        const tf_fit_settings *fs = tf_fit_settings_of(f);
        double rhat, ess;
        fit_mixing(f, &rhat, &ess);
        printf("Forecast%s from the posterior of %s: %zu draws (%zu chains x %zu, after %zu warm-up;\n"
               "  %zu particles; R-hat largest %.3f, ESS smallest %.0f)\n",
               who, tf_model_name(j->model), tf_fit_n_draws(f), tf_fit_n_chains(f), tf_fit_n_iter(f),
               fs->n_warmup, fs->n_particles, rhat, ess);
        if (isnan(o->start)) {
            const tf_fit_year_summary *y = tf_fit_year(f, ny - 1);
            printf("  start: each draw's latent abundance in %d (median %.4g, 95 %% interval %.4g to %.4g%s)\n",
                   j->year0, y->median, y->q025, y->q975, unit);
        }
    } else {
        const tf_analysis_pop *p = j->pop;
        size_t n = tf_analysis_pop_n_models(p), n_fitted = 0, order[TF_ANALYSIS_MAX_MODELS];
        for (size_t i = 0; i < n; i++)
            n_fitted += tf_analysis_pop_model(p, i)->state == TF_CANDIDATE_FITTED;
        by_probability(p, order);
        printf("Forecast%s averaged over %zu fitted model%s by posterior model probability\n", who, n_fitted,
               n_fitted == 1 ? "" : "s");
        printf("  %-28s %8s %7s %8s %8s %7s %6s\n", "model", "P(model)", "se", "draws", "futures", "R-hat", "ESS");
        for (size_t r = 0; r < n; r++) {
            const tf_analysis_model *m = tf_analysis_pop_model(p, order[r]);
            if (m->state != TF_CANDIDATE_FITTED)
                continue;
            const tf_candidate_figures *fg = tf_comparison_figures(tf_analysis_pop_comparison(p), order[r]);
            printf("  %-28s %8.3f %7.3f %8zu %8zu %7.3f %6.0f\n", m->name, m->probability, fg->prob_se,
                   tf_fit_n_draws(m->fit), candidate_runs(p, order[r]), fg->rhat_max, fg->ess_min);
        }
        for (size_t r = 0; r < n; r++) {
            const tf_analysis_model *m = tf_analysis_pop_model(p, order[r]);
            if (m->state != TF_CANDIDATE_FITTED)
                printf("  %s %s: %s\n", m->state == TF_CANDIDATE_FAILED ? "failed:  " : "excluded:", m->name, m->note);
        }
        if (isnan(o->start)) {
            const tf_analysis_year *y = tf_analysis_pop_year(p, ny - 1);
            printf("  start: each draw's latent abundance in %d (model-averaged median %.4g, 95 %% interval %.4g to "
                   "%.4g%s)\n", j->year0, y->median, y->q025, y->q975, unit);
        }
    }
    if (!isnan(o->start))
        printf("  start: N = %g for every draw (--start, a what-if), from %d\n", o->start, j->year0);
}

static void print_projection(const options *o, const job *j)
{
    const tf_projection *p = j->proj;
    size_t H = tf_projection_horizon(p);
    printf("  %zu simulated futures, %zu years ahead, seed %llu\n", tf_projection_n_runs(p), H,
           (unsigned long long)o->seed);
    int cal = j->year0 != TF_PROJECTION_NO_YEAR;
    size_t step = H <= 100 ? 10 : (H + 9) / 10;
    printf("\nAbundance (median and 90 %% band of the simulated futures)\n%s      median        5 %%       95 %%\n",
           cal ? "  ahead  year" : "   year");
    for (size_t t = 0;; t = t + step < H ? t + step : H) {
        printf("  %5zu", t);
        if (cal)
            printf(" %5d", j->year0 + (int)t);
        printf("  %10.4g %10.4g %10.4g\n", tf_projection_band(p, t, TF_BAND_MEDIAN), tf_projection_band(p, t, TF_BAND_P05),
               tf_projection_band(p, t, TF_BAND_P95));
        if (t == H)
            break;
    }

    size_t at[4], n_at = 0;
    static const size_t marks[] = {10, 20, 50};
    for (size_t i = 0; i < 3; i++)
        if (marks[i] < H)
            at[n_at++] = marks[i];
    at[n_at++] = H;
    printf("\nQuasi-extinction: chance of having been at or below the threshold\n  threshold ");
    for (size_t i = 0; i < n_at; i++) {
        char head[32];
        snprintf(head, sizeof head, "by year %zu", at[i]);
        printf("  %15s", head);
    }
    printf("   median time\n");
    for (size_t k = 0; k < tf_projection_n_thresholds(p); k++) {
        tf_threshold th = tf_projection_threshold(p, k);
        char label[48], cell[48];
        printf("  %-10s", tf_project_threshold_label(&th, label, sizeof label));
        for (size_t i = 0; i < n_at; i++) {
            snprintf(cell, sizeof cell, "%.3f +- %.3f", tf_projection_risk(p, k, at[i]), tf_projection_risk_se(p, k, at[i]));
            printf("  %15s", cell);
        }
        double mt = tf_projection_median_time(p, k);
        if (isnan(mt))
            printf("   not reached\n");
        else
            printf("   year %.0f\n", mt);
    }

    printf("\nDecline from the current abundance (chance that N after the window <= (1 - decline) N now)\n"
           "  window  ");
    for (size_t d = 0; d < tf_projection_n_declines(p); d++) {
        char head[32];
        snprintf(head, sizeof head, ">= %.0f %%", 100 * tf_projection_decline(p, d));
        printf("  %15s", head);
    }
    putchar('\n');
    for (size_t w = 0; w < tf_projection_n_windows(p); w++) {
        printf("  %3zu years", tf_projection_window(p, w));
        for (size_t d = 0; d < tf_projection_n_declines(p); d++) {
            char cell[48];
            snprintf(cell, sizeof cell, "%.3f +- %.3f", tf_projection_decline_prob(p, w, d),
                     tf_projection_decline_se(p, w, d));
            printf("  %15s", cell);
        }
        putchar('\n');
    }
    printf("\nTables in %s:", j->dir);
    for (size_t i = 0; i < N_TABLES; i++) {
        char name[128];
        tf_csv_file_name(tf_table_name(j->tables[i]), name, sizeof name);
        printf("%s %s", i ? "," : "", name);
    }
    putchar('\n');
}

/* Plain warnings on stderr for fits that should not be trusted yet, and failed candidates. */
static void print_warnings(const options *o, const job *j)
{
    const char *label = j->label, *sp = label[0] ? " " : "";
    if (o->from == FROM_MODEL && !tf_fit_converged(j->fit)) {
        double rhat, ess;
        fit_mixing(j->fit, &rhat, &ess);
        fprintf(stderr,
                PROG ": warning: %s%s%s: R-hat largest %.3f, ESS smallest %.0f; the chains may not have converged "
                     "(want R-hat <= %.2f and ESS >= %.0f)\n  hint: run longer (--iterations, --warmup)\n",
                label, sp, tf_model_name(j->model), rhat, ess, TF_FIT_RHAT_MAX, TF_FIT_ESS_MIN);
    }
    if (o->from != FROM_AVERAGE)
        return;
    const tf_comparison *c = tf_analysis_pop_comparison(j->pop);
    for (size_t i = 0; i < tf_analysis_pop_n_models(j->pop); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(j->pop, i);
        if (m->state == TF_CANDIDATE_FAILED)
            fprintf(stderr, PROG ": warning: %s%s%s: %s\n", label, sp, m->name, m->note);
        if (m->probability > 0 && !tf_fit_converged(m->fit))
            fprintf(stderr,
                    PROG ": warning: %s%s%s (probability %.3f): R-hat largest %.3f, ESS smallest %.0f; the chains may "
                         "not have converged\n  hint: run longer (--iterations, --warmup)\n",
                    label, sp, m->name, m->probability, tf_comparison_figures(c, i)->rhat_max,
                    tf_comparison_figures(c, i)->ess_min);
    }
}

/* Builds the tables of every job, writes them as one group and prints the summaries. */
static int finish(const options *o, job *jobs, size_t n_jobs)
{
    tf_error err;
    tf_error_init(&err);
    tf_status st = TF_OK;
    for (size_t i = 0; i < n_jobs && st == TF_OK; i++)
        st = build_tables(o, &jobs[i], &err);
    if (st == TF_OK && *tf_signals_flag())
        st = tf_error_add(&err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
    if (st == TF_OK)
        st = write_all(jobs, n_jobs, o->survey_path, &err);
    if (st != TF_OK) {
        if (st == TF_ERR_INTERRUPTED)
            return TF_EXIT_INTERRUPTED;
        tf_error_print(&err, PROG, stderr);
        return tf_args_exit_code(st);
    }
    for (size_t i = 0; i < n_jobs; i++) {
        if (!o->quiet) {
            if (i > 0)
                putchar('\n');
            print_source(o, &jobs[i]);
            print_projection(o, &jobs[i]);
        }
        print_warnings(o, &jobs[i]);
    }
    print_cautions(o, jobs, n_jobs);
    if (fflush(stdout) != 0) {
        return tf_messages_error(PROG, TF_EXIT_FAIL, NULL, "cannot write to standard output");
    }
    return TF_EXIT_OK;
}

/* ---- the three sources ----------------------------------------------------------------------------- */

/* The starting abundance from the survey (or --start) and the calendar year of t = 0 of a fixed
 * forecast: the last year with a count (rows listed after it without one add nothing to start
 * from). Returns an exit code. */
static int fixed_start(const options *o, const tf_series *s, job *j)
{
    const double *counts = tf_series_counts(s);
    size_t last = tf_series_n_years(s);
    while (last > 0 && isnan(counts[last - 1]))
        last--;
    if (last == 0) {
        return tf_messages_error(PROG, TF_EXIT_FAIL, "give the current abundance with --start N",
                                 "population '%s' has no surveyed count to start from", j->label);
    }
    last--;
    j->year0 = tf_series_first_year(s) + (int)last;
    if (!isnan(o->start)) {
        j->start = o->start;
        return TF_EXIT_OK;
    }
    double y = counts[last], e = tf_series_effort(s)[last];
    if (!(y > 0)) {
        return tf_messages_error(PROG, TF_EXIT_FAIL, "give the current abundance with --start N",
                                 "the last surveyed count (in %d) is 0, and a projection on the log scale cannot "
                                 "start from zero", j->year0);
    }
    j->start = y / e;
    if (!o->quiet)
        printf("Starting from the last surveyed count: %g in %d (effort %g), N = %g; --start N starts elsewhere\n", y,
               j->year0, e, j->start);
    return TF_EXIT_OK;
}

static int run_fixed(const options *o, const tf_project_options *po)
{
    tf_error err;
    tf_error_init(&err);
    const tf_obs_type *obs = NULL;
    if (o->obs && !(obs = tf_model_find_obs(o->obs))) {
        char known[256], hint[300];
        tf_model_list_obs(known, sizeof known);
        snprintf(hint, sizeof hint, "known models: %s", known);
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown counting-error model '%s'", o->obs);
        return tf_messages_usage(PROG, &err);
    }
    job j = {.label = "", .year0 = TF_PROJECTION_NO_YEAR, .start = o->start};
    const tf_growth_type *g = pick_growth(o, obs, &err);
    /* The joined model only lays out the parameters; without --obs any counting-error model
     * will do, and Poisson has no parameters to give. */
    if (!g || tf_model_new(g->name, obs ? obs->name : "poisson", &j.model, &err) != TF_OK)
        return tf_messages_usage(PROG, &err);
    int rc = TF_EXIT_OK;
    tf_survey *sv = NULL;
    if (fixed_theta(j.model, &o->fixed, j.theta, o->quiet, &err) != TF_OK) {
        rc = tf_messages_usage(PROG, &err);
    } else if (o->survey_path) {
        tf_status rst = tf_input_read(&o->in, o->survey_path, stderr, PROG, &sv, &err);
        if (rst) {
            tf_error_print(&err, PROG, stderr);
            rc = rst == TF_ERR_USAGE ? TF_EXIT_USAGE : TF_EXIT_INPUT;
        } else if (!(j.s = tf_args_pick_series(sv, o->population, o->survey_path, &err))) {
            rc = tf_messages_usage(PROG, &err);
        } else {
            j.label = tf_series_label(j.s);
            rc = fixed_start(o, j.s, &j);
        }
    }
    tf_status dst = rc ? TF_OK : job_dir(o, sv, &j, &err);
    if (dst == TF_OK && !rc)
        dst = tf_args_probe_output_dir(j.dir, o->survey_path, &err);
    if (dst != TF_OK) {
        tf_error_print(&err, PROG, stderr);
        rc = tf_args_exit_code(dst);
    }
    if (!rc) {
        double x0 = log(j.start);
        tf_project_input in = tf_project_input_from_model(j.model, j.theta, 1, &x0, 1.0);
        uint64_t keys[2] = {tf_rng_key("forecast"), tf_rng_key(j.label)};
        tf_rng rng;
        tf_rng_derive(&rng, o->seed, keys, 2);
        tf_status st = tf_project_run(&in, 1, po, &rng, &j.own, &err);
        j.proj = j.own;
        if (st == TF_ERR_INTERRUPTED) {
            rc = TF_EXIT_INTERRUPTED;
        } else if (st) {
            tf_error_print(&err, PROG, stderr);
            /* Range and validity errors of the projection come from the command line (--fixed, --start). */
            rc = st == TF_ERR_NOMEM || st == TF_ERR_NUMERIC ? TF_EXIT_FAIL : TF_EXIT_USAGE;
        }
    }
    if (!rc)
        rc = finish(o, &j, 1);
    job_clear(&j);
    tf_survey_free(sv);
    return rc;
}

/* Reads the survey of a posterior forecast and the populations it covers: --population, else
 * every one (*only NULL); --start gives one abundance, so it needs a single population. Returns
 * an exit code. */
static int read_populations(const options *o, tf_survey **sv, const tf_series **only, tf_error *err)
{
    *only = NULL;
    tf_status st = tf_input_read(&o->in, o->survey_path, stderr, PROG, sv, err);
    if (st != TF_OK)
        return st == TF_ERR_USAGE ? TF_EXIT_USAGE : TF_EXIT_INPUT;
    if (!o->population && isnan(o->start))
        return TF_EXIT_OK;
    if (!(*only = tf_args_pick_series(*sv, o->population, o->survey_path, err))) {
        if (!o->population)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--start gives the abundance of one population");
        return TF_EXIT_USAGE;
    }
    return TF_EXIT_OK;
}

/* The end of a posterior forecast: prints err unless the run succeeded or was interrupted (finish
 * prints its own errors, and the caller says when the run was interrupted), frees the jobs, and
 * returns rc. */
static int end_run(int rc, const tf_error *err, job *jobs, size_t n_jobs)
{
    if (rc != TF_EXIT_OK && rc != TF_EXIT_INTERRUPTED && tf_error_status(err) != TF_OK)
        tf_error_print(err, PROG, stderr);
    for (size_t i = 0; jobs && i < n_jobs; i++)
        job_clear(&jobs[i]);
    free(jobs);
    return rc;
}

static int run_model(const options *o, const tf_project_options *po)
{
    tf_error err;
    tf_error_init(&err);
    const char *obs = o->obs ? o->obs : tf_input_default_obs(&o->in);
    if (tf_args_check_model(o->model, obs, &err) != TF_OK)
        return tf_messages_usage(PROG, &err);

    tf_pmmh_options opt = tf_pmmh_default_options();
    opt.n_threads = tf_args_default_threads(TF_ARGS_MAX_THREADS);
    opt.seed = o->seed;
    if (tf_args_sampler_apply(&o->sampler, &opt, NULL, NULL, NULL, &err) != TF_OK)
        return tf_messages_usage(PROG, &err);

    int rc = TF_EXIT_FAIL;
    tf_survey *sv = NULL;
    job *jobs = NULL;
    size_t n_jobs = 0;
    const tf_series *only;
    int code = read_populations(o, &sv, &only, &err);
    if (code != TF_EXIT_OK) {
        rc = code;
        goto out;
    }
    n_jobs = only ? 1 : tf_survey_n_series(sv);
    if (!(jobs = calloc(n_jobs, sizeof *jobs))) {
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
        goto out;
    }
    /* Every population is set up before the first long run, so that a bad count in the last one
     * is reported at once. */
    for (size_t i = 0; i < n_jobs; i++) {
        job *j = &jobs[i];
        j->s = only ? only : tf_survey_series(sv, i);
        j->label = tf_series_label(j->s);
        j->year0 = last_year(j->s);
        if (tf_model_new(o->model, obs, &j->model, &err) != TF_OK)
            goto out;
        if (tf_setup_check_counts(j->model, j->s, o->survey_path, &err) != TF_OK ||
            tf_model_initial_from_series(j->model, j->s, &err) != TF_OK ||
            tf_args_bind_model(j->model, &o->sampler.prior, 0, (double[TF_MAX_PARAMS]){0}, NULL, &err) != TF_OK ||
            tf_setup_priors(j->model, j->s, o->sampler.prior_file, &j->priors, &err) != TF_OK ||
            tf_posterior_new(j->model, j->priors, &j->post, &err) != TF_OK) {
            rc = TF_EXIT_INPUT;
            goto out;
        }
        if (job_dir(o, sv, j, &err) != TF_OK) {
            rc = TF_EXIT_USAGE;
            goto out;
        }
        tf_status pst = tf_args_probe_output_dir(j->dir, o->survey_path, &err);
        if (pst != TF_OK) {
            rc = tf_args_exit_code(pst);
            goto out;
        }
    }
    int show = !o->quiet && isatty(STDERR_FILENO);
    for (size_t i = 0; i < n_jobs; i++) {
        job *j = &jobs[i];
        if (show)
            fprintf(stderr, "%s%s%s: fitting by PMMH (%zu chains, %zu warm-up iterations, then %zu to %zu "
                    "until they converge)...\n", j->label, j->label[0] ? " " : "", tf_model_name(j->model),
                    opt.n_chains, opt.n_warmup, opt.min_iter, opt.max_iter);
        tf_status st = tf_pmmh_run(j->post, j->s, &opt, tf_signals_flag(), NULL, NULL, &j->fit, &err);
        if (st == TF_OK) {
            size_t nd = tf_fit_n_draws(j->fit);
            if (!(j->x_last = malloc(nd * sizeof *j->x_last))) {
                st = tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for the projection");
            } else {
                tf_fit_year_draws(j->fit, tf_fit_n_years(j->fit) - 1, j->x_last);
                tf_project_input in = tf_project_input_from_model(j->model, tf_fit_draws(j->fit), nd, j->x_last, 1.0);
                /* The stream analysis.c gives the projection of the same population, so that
                 * --average over this one model gives these very futures. */
                uint64_t keys[2] = {tf_rng_key("projection"), tf_rng_key(j->label)};
                tf_rng rng;
                tf_rng_derive(&rng, o->seed, keys, 2);
                st = tf_project_run(&in, 1, po, &rng, &j->own, &err);
                j->proj = j->own;
            }
        }
        if (st != TF_OK) {
            rc = tf_args_exit_code(st);
            goto out;
        }
    }
    rc = finish(o, jobs, n_jobs);
out:
    rc = end_run(rc, &err, jobs, n_jobs);
    tf_survey_free(sv);
    return rc;
}

static int run_average(const options *o, const tf_project_options *po)
{
    tf_error err;
    tf_error_init(&err);
    tf_analysis_options ao;
    if (tf_analysis_options_init(&ao, &err) != TF_OK) {
        tf_error_print(&err, PROG, stderr);
        return TF_EXIT_FAIL;
    }
    char growth_buf[1024], obs_buf[1024];
    int all = 0;
    if (o->model)
        tf_args_model_names("--model", o->model, growth_buf, sizeof growth_buf, ao.growth, TF_ANALYSIS_MAX_NAMES,
                            &ao.n_growth, &all, 1, &err);
    if (o->obs)
        tf_args_model_names("--obs", o->obs, obs_buf, sizeof obs_buf, ao.obs, TF_ANALYSIS_MAX_NAMES, &ao.n_obs,
                            &ao.obs_auto, 0, &err);
    tf_input_check_obs(&o->in, "--obs", ao.obs, ao.n_obs, &err);
    ao.estimates = o->in.estimates;
    ao.project = *po;
    ao.seed = o->seed;
    ao.n_threads = tf_args_default_threads(TF_ARGS_MAX_THREADS);
    tf_args_sampler_apply(&o->sampler, &ao.fit, &ao.evidence, &ao.seed, &ao.n_threads, &err);
    const char *wnames[TF_ARGS_MAX_PAIRS];
    double wvals[TF_ARGS_MAX_PAIRS];
    if (tf_error_status(&err) == TF_OK)
        tf_args_sampler_weights(&o->sampler, ao.growth, ao.n_growth, ao.obs, ao.obs_auto ? 0 : ao.n_obs, wnames, wvals,
                                &ao.n_weights, &err);
    ao.weight_names = wnames;
    ao.weights = wvals;
    tf_setup_user user;
    tf_args_sampler_user(&o->sampler, &user);
    ao.priors = tf_setup_user_priors;
    ao.priors_ctx = &user;
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage(PROG, &err);

    int rc = TF_EXIT_FAIL;
    tf_survey *sv = NULL;
    tf_analysis *a = NULL;
    job *jobs = NULL;
    size_t n_jobs = 0;
    const tf_series *only;
    tf_status st;
    int code = read_populations(o, &sv, &only, &err);
    if (code != TF_EXIT_OK) {
        rc = code;
        goto out;
    }
    ao.population = only ? tf_series_label(only) : NULL;
    /* A survey of one unnamed population has nothing to find by name. */
    if (ao.population && !ao.population[0])
        ao.population = NULL;
    /* Every output folder is checked before the fits. */
    for (size_t i = 0; i < (only ? 1 : tf_survey_n_series(sv)); i++) {
        job probe = {.label = tf_series_label(only ? only : tf_survey_series(sv, i))};
        if ((st = job_dir(o, sv, &probe, &err)) != TF_OK ||
            (st = tf_args_probe_output_dir(probe.dir, o->survey_path, &err)) != TF_OK) {
            rc = tf_args_exit_code(st);
            goto out;
        }
    }
    if ((st = tf_setup_check_candidates(&user, ao.growth, ao.n_growth, ao.obs, ao.n_obs, only ? only : tf_survey_series(sv, 0),
                                        &err)) != TF_OK) {
        rc = TF_EXIT_INPUT;
        goto out;
    }
    for (size_t i = 0; i < (only ? 1 : tf_survey_n_series(sv)); i++) {
        const tf_series *s = only ? only : tf_survey_series(sv, i);
        const char *names[TF_ANALYSIS_MAX_NAMES];
        size_t n = tf_analysis_candidate_obs(&ao, s, names, TF_ANALYSIS_MAX_NAMES);
        if ((st = tf_setup_check_any_suits(names, n, s, o->survey_path, &err)) != TF_OK) {
            rc = TF_EXIT_INPUT;
            goto out;
        }
    }
    char name[256];
    tf_args_survey_name(o->survey_path, name, sizeof name);
    int show = !o->quiet && isatty(STDERR_FILENO);
    if ((st = tf_analysis_run(sv, &ao, tf_signals_flag(), show ? tf_messages_analysis : NULL, name, &a, &err)) != TF_OK) {
        rc = tf_args_exit_code(st);
        goto out;
    }
    n_jobs = tf_analysis_n_populations(a);
    if (!(jobs = calloc(n_jobs, sizeof *jobs))) {
        tf_error_add(&err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
        goto out;
    }
    for (size_t i = 0; i < n_jobs; i++) {
        job *j = &jobs[i];
        j->pop = tf_analysis_population(a, i);
        j->s = tf_analysis_pop_series(j->pop);
        j->label = tf_series_label(j->s);
        j->year0 = last_year(j->s);
        j->proj = tf_analysis_pop_projection(j->pop);
        if (job_dir(o, sv, j, &err) != TF_OK) {
            rc = TF_EXIT_USAGE;
            goto out;
        }
    }
    rc = finish(o, jobs, n_jobs);
out:
    rc = end_run(rc, &err, jobs, n_jobs);
    tf_analysis_free(a);
    tf_survey_free(sv);
    return rc;
}

/* ---- the command line ---------------------------------------------------------------------------- */

enum { OPT_MODEL = 256, OPT_OBS, OPT_AVERAGE, OPT_YEARS, OPT_THRESHOLD, OPT_WINDOW, OPT_RUNS, OPT_PARAMETER,
       OPT_START, OPT_POPULATION, OPT_SKIP, OPT_ESTIMATES };

/* Fills o from the command line, collecting every problem in err. Returns 1 when --help was
 * shown (nothing else to do), else 0; the caller checks err. */
static int parse_options(int argc, char **argv, options *o, tf_error *err)
{
    static const struct option longs[] = {
        {"model", required_argument, NULL, OPT_MODEL},
        {"obs", required_argument, NULL, OPT_OBS},
        {"average", no_argument, NULL, OPT_AVERAGE},
        {"years", required_argument, NULL, OPT_YEARS},
        {"threshold", required_argument, NULL, OPT_THRESHOLD},
        {"decline-window", required_argument, NULL, OPT_WINDOW},
        {"runs", required_argument, NULL, OPT_RUNS},
        {"parameter", required_argument, NULL, OPT_PARAMETER},
        {"start", required_argument, NULL, OPT_START},
        {"population", required_argument, NULL, OPT_POPULATION},
        {"skip-unusable", no_argument, NULL, OPT_SKIP},
        {"estimates", no_argument, NULL, OPT_ESTIMATES},
        TF_ARGS_SAMPLER_LONGOPTS,
        TF_ARGS_ML_LONGOPTS,
        {"output", required_argument, NULL, 'o'},
        {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0},
    };
    memset(o, 0, sizeof *o);
    tf_args_pairs_init(&o->fixed);
    tf_args_sampler_init(&o->sampler);
    o->years = TF_PROJECT_DEFAULT_HORIZON;
    o->thresholds = DEFAULT_THRESHOLDS;
    o->start = NAN;
    o->seed = DEFAULT_SEED;
    opterr = 0;
    optind = 0; /* glibc: 0 restarts the scan, so the command can be run twice in one process */
    int c;
    while ((c = getopt_long(argc, argv, ":o:qh", longs, NULL)) != -1) {
        switch (c) {
        case OPT_MODEL: o->model = optarg; break;
        case OPT_OBS: o->obs = optarg; break;
        case OPT_AVERAGE: o->average = 1; break;
        case OPT_THRESHOLD: o->thresholds = optarg; break;
        case OPT_PARAMETER:
            o->have_fixed = 1;
            tf_args_parse_pairs("--parameter", optarg, &o->fixed, err);
            break;
        case OPT_POPULATION: tf_input_set_population(&o->in, optarg, err); break;
        case OPT_SKIP: o->in.skip_unusable = 1; break;
        case OPT_ESTIMATES: o->in.estimates = 1; break;
        case 'o': o->out_dir = optarg; break;
        case 'q': o->quiet = 1; break;
        case 'h': help(stdout); return 1;
        case OPT_YEARS: tf_args_parse_size("--years", optarg, 1, TF_PROJECT_MAX_HORIZON, &o->years, err); break;
        case OPT_WINDOW:
            tf_args_parse_size("--decline-window", optarg, 1, TF_PROJECT_MAX_HORIZON, &o->decline_window, err);
            break;
        case OPT_RUNS: tf_args_parse_size("--runs", optarg, 1, MAX_RUNS, &o->runs, err); break;
        case OPT_START:
            /* Above e^50 (5e21) the log-abundance leaves the projection's range. */
            if (tf_args_parse_double("--start", optarg, &o->start, err) == TF_OK &&
                !(o->start > 0 && log(o->start) <= TF_PROJECT_LOG_MAX && log(o->start) >= TF_PROJECT_LOG_MIN))
                tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                             "--start: the current abundance must be > 0 and below 5e21");
            break;
        default:
            if (!tf_args_sampler_option(c, optarg, &o->sampler, err))
                tf_args_getopt_error(CMD, c, optopt, argv[optind - 1], err);
            break;
        }
    }
    if (o->sampler.seed_given)
        o->seed = o->sampler.seed;
    o->survey_path = tf_args_survey_path(argc, argv, optind, err);
    o->population = tf_input_single(&o->in);
    return 0;
}

/* Picks the source of futures and refuses the combinations that mean nothing. */
static void check_source(options *o, tf_error *err)
{
    if (o->average && o->have_fixed) {
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                     "--average combines fitted models; with --parameter there is nothing to average");
        return;
    }
    o->from = o->have_fixed ? FROM_FIXED : o->average ? FROM_AVERAGE : o->model ? FROM_MODEL : FROM_NONE;
    switch (o->from) {
    case FROM_NONE:
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                     "give --model M [--obs O] to fit one model, --average to fit the candidate models and average "
                     "them, or --parameter r=...,sigma=... for given values",
                     o->obs ? "--obs needs --model M (or --average)" : "nothing to project from");
        return;
    case FROM_FIXED:
        if (o->sampler.first)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "drop it, or fit with --model M instead of --parameter",
                         "%s sets up a fit; --parameter projects from given values", o->sampler.first);
        if (!o->survey_path && isnan(o->start))
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                         "without a survey file, --start N (the current abundance) is required");
        if (!o->survey_path && o->in.n_labels)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--population needs a survey file");
        return;
    case FROM_MODEL: {
        const char *obs = o->obs ? o->obs : tf_input_default_obs(&o->in);
        tf_input_check_obs(&o->in, "--obs", &obs, 1, err);
    }
        if (strchr(o->model, ',') || (o->obs && strchr(o->obs, ',')))
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "add --average to compare and average several models",
                         "--model and --obs name one model each without --average");
        if (o->sampler.first_ml)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                         "%s belongs to the comparison of models by marginal likelihood, which only --average "
                         "makes",
                         o->sampler.first_ml);
        break;
    case FROM_AVERAGE:
        break;
    }
    if (!o->survey_path)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give the survey file to fit",
                     "--%s fits the counts of a survey", o->from == FROM_AVERAGE ? "average" : "model");
}

int tf_cmd_forecast(int argc, char **argv)
{
    options o;
    tf_error err;
    tf_error_init(&err);
    if (parse_options(argc, argv, &o, &err))
        return TF_EXIT_OK;
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage(PROG, &err);
    check_source(&o, &err);

    tf_project_options po;
    tf_project_options_init(&po);
    po.horizon = o.years;
    po.n_runs = o.runs;
    po.decline_window = o.decline_window;
    po.stop = tf_signals_flag();
    /* A fixed forecast passes its start as the draw's own; a posterior one overrides the draws'. */
    if (o.from != FROM_FIXED && !isnan(o.start))
        po.start = o.start;
    tf_project_parse_thresholds(o.thresholds, po.thresholds, TF_PROJECT_MAX_THRESHOLDS, &po.n_thresholds, &err);
    if (tf_error_status(&err) != TF_OK)
        return tf_messages_usage(PROG, &err);

    tf_signals saved;
    tf_signals_catch(&saved);
    int rc = o.from == FROM_FIXED ? run_fixed(&o, &po) : o.from == FROM_MODEL ? run_model(&o, &po)
                                                                              : run_average(&o, &po);
    if (rc == TF_EXIT_INTERRUPTED)
        fprintf(stderr, PROG ": interrupted; no tables written\n");
    tf_signals_restore(&saved);
    return rc;
}
