/* The main job for one survey: for each population, fit every candidate model (each growth model
 * with each counting-error model that suits the counts), compare them by marginal likelihood,
 * project forward averaging the models by their posterior probabilities, and keep everything
 * the report and the printed summary show. Nothing here prints or writes files. */
#ifndef TF_ANALYSIS_H
#define TF_ANALYSIS_H

#include <signal.h>
#include <stddef.h>
#include <stdint.h>

#include "compare/compare.h"
#include "compare/sensitivity.h"
#include "model/model.h"
#include "project/project.h"
#include "project/safe_removal.h"
#include "project/scenario.h"
#include "sampler/fit.h"
#include "survey/survey.h"
#include "util/error.h"

/* The most growth or counting-error names one analysis takes. */
#define TF_ANALYSIS_MAX_NAMES 16
/* The most candidate models of one population. */
#define TF_ANALYSIS_MAX_MODELS TF_COMPARE_MAX_MODELS

/* Windows (years ahead) at which the risk of falling below each threshold is reported. */
#define TF_ANALYSIS_N_RISK_YEARS 3
extern const size_t tf_analysis_risk_years[TF_ANALYSIS_N_RISK_YEARS];

typedef struct {
    /* Candidate growth models by name; n_growth = 0: every growth model. */
    size_t n_growth;
    const char *growth[TF_ANALYSIS_MAX_NAMES];
    /* Candidate counting-error models by name. n_obs = 0: the defaults of analysis.c (Poisson
     * and negative binomial for whole counts, the log-normal for other amounts); obs_auto: every
     * model that suits the counts, as the comparison chooses them (then n_obs is ignored). */
    size_t n_obs;
    const char *obs[TF_ANALYSIS_MAX_NAMES];
    int obs_auto;
    /* The counts are estimates (indices, densities), not whole counts: only counting-error models
     * of continuous amounts are candidates, whatever the values (the first page says so). */
    int estimates;
    /* --counted-fraction: the share of the animals present that a count at effort 1 includes
     * (0 is read as 1). Only recorded here: the series carry it into the fits. */
    double counted_fraction;
    /* Sampler and marginal-likelihood settings of every fit; their seeds and thread counts are
     * replaced by seed and n_threads below. */
    tf_pmmh_options fit;
    tf_evidence_options evidence;
    /* Projection: horizon, runs, thresholds, declines (its stop is set by tf_analysis_run; its
     * status quo by each population's recorded removals, tf_scenario_status_quo_animals). */
    tf_project_options project;
    /* Management scenarios projected beside the status quo from the same draws with the same
     * random numbers (borrowed; n_scenarios 0 = none), and the largest safe removal when
     * safe.years > 0 (the first threshold is its quasi-extinction threshold). */
    const tf_scenario *scenarios;
    size_t n_scenarios;
    tf_safe_removal_ask safe;
    uint64_t seed;
    size_t n_threads;       /* >= 1; the results do not depend on it */
    const char *population; /* analyse only this population; NULL = all of them */
    /* Builds each candidate's priors (required; see tf_compare_priors_fn). */
    tf_compare_priors_fn priors;
    void *priors_ctx;
    /* Prior model weights, as tf_compare_options takes them (borrowed; n_weights = 0: all equal). */
    const char *const *weight_names;
    const double *weights;
    size_t n_weights;
    /* Prior sensitivity (compare/sensitivity.h): on by default, since reweighting costs no new
     * likelihood estimate. The standard alternatives, then the user's (borrowed, at most
     * TF_ANALYSIS_MAX_USER_ALTERNATIVES); refit: estimate the evidence again where the
     * reweighted draws do not cover an alternative (off by default: it costs as much as a new
     * importance-sampling run each time). */
    int prior_sensitivity;
    int prior_refit;
    const tf_sensitivity_alternative *prior_alternatives;
    size_t n_prior_alternatives;
} tf_analysis_options;

/* The most prior alternatives a user may give. */
#define TF_ANALYSIS_MAX_USER_ALTERNATIVES 16

/* The defaults analyze uses (the reasons are in analysis.c): the exponential, Ricker and
 * Gompertz growth models, Poisson and negative binomial counting error for whole counts
 * (log-normal otherwise), the sampler's defaults with 2500 kept draws per chain, the marginal
 * likelihood's own defaults, a 50-year
 * projection with thresholds of 50 %, 20 % and 10 % of the current abundance, seed 1, one
 * thread, no priors callback (the caller sets one). Returns TF_OK; fills err only if the
 * default thresholds could not be read (never, short of a bug). */
tf_status tf_analysis_options_init(tf_analysis_options *o, tf_error *err);

/* The counting-error models that are candidates for series s under o, by name, into names (room
 * for max); returns how many, 0 meaning every known one that suits the counts (obs_auto). */
size_t tf_analysis_candidate_obs(const tf_analysis_options *o, const tf_series *s, const char **names, size_t max);

/* What a progress callback hears. */
typedef enum {
    TF_ANALYSIS_STARTED,     /* a population's comparison begins */
    TF_ANALYSIS_MODEL_DONE,  /* a candidate is fitted (or failed): model names it */
    TF_ANALYSIS_PROJECTING,  /* the comparison is done; the projection runs */
    TF_ANALYSIS_DONE,        /* the population is done */
} tf_analysis_stage;
typedef struct {
    tf_analysis_stage stage;
    size_t population, n_populations;
    const char *label;      /* the population's label ("" = unnamed) */
    const char *model;      /* TF_ANALYSIS_MODEL_DONE: the candidate's name; else NULL */
    int failed;             /* TF_ANALYSIS_MODEL_DONE: 1 when its fit failed */
    double seconds;         /* since the population started */
    double model_seconds;   /* TF_ANALYSIS_MODEL_DONE: the candidate's own time (fit and
                             * marginal likelihood) */
} tf_analysis_event;
/* Called one call at a time, from the calling thread or from a worker thread of the
 * comparison; it must not call back into the analysis. */
typedef void (*tf_analysis_progress_fn)(void *ctx, const tf_analysis_event *e);

/* One candidate model of one population, as the comparison left it. */
typedef struct {
    const char *name;             /* "gompertz+poisson" */
    const tf_growth_type *growth;
    const tf_obs_type *obs;
    tf_candidate_state state;
    const char *note;             /* why it was excluded or failed, or a caution; "" when none */
    const tf_fit *fit;            /* NULL unless fitted */
    const tf_evidence *evidence;  /* NULL unless fitted */
    double probability;           /* posterior model probability; 0 unless fitted */
} tf_analysis_model;

/* Model-averaged posterior of the abundance in one year of the series. */
typedef struct {
    int year;
    double count, effort;         /* count NAN when the year was not surveyed */
    double median, q25, q75, q025, q975;
} tf_analysis_year;

/* Model-averaged trend over first_year..last_year, as a fraction per year (-0.02 = 2 % decline a
 * year): per draw exp(b) - 1 with b the least-squares slope of the latent log-abundance on the
 * year over every year of the period (as tf_fit_trend_summary). */
typedef struct {
    int first_year, last_year;
    double mean, median, q025, q975;
    double p_decline;             /* posterior probability of a negative change */
} tf_analysis_trend;

typedef struct tf_analysis tf_analysis;
typedef struct tf_analysis_pop tf_analysis_pop;

/* Runs the job on every population of sv (or options->population only). Each population's
 * streams are derived from the seed and its label, so a population gets the same results
 * alone or among others and for any thread count. stop: polled throughout; when it becomes
 * non-zero the run ends within a fraction of a second with TF_ERR_INTERRUPTED. progress may be
 * NULL. On success *out holds the results (free with tf_analysis_free; it borrows sv).
 * Errors: TF_ERR_USAGE (unknown model name or population), TF_ERR_INVALID (no candidate model
 * suits a population's counts, naming the file and line), TF_ERR_NUMERIC (every fit of a
 * population failed), TF_ERR_NOMEM, TF_ERR_INTERRUPTED, or the model files' errors. */
tf_status tf_analysis_run(const tf_survey *sv, const tf_analysis_options *options, const volatile sig_atomic_t *stop,
                          tf_analysis_progress_fn progress, void *progress_ctx, tf_analysis **out, tf_error *err);
void tf_analysis_free(tf_analysis *a);   /* accepts NULL */

const tf_analysis_options *tf_analysis_options_of(const tf_analysis *a);
size_t tf_analysis_n_populations(const tf_analysis *a);
const tf_analysis_pop *tf_analysis_population(const tf_analysis *a, size_t i);

const tf_series *tf_analysis_pop_series(const tf_analysis_pop *p);
/* The comparison behind the population's models (for its table). */
const tf_comparison *tf_analysis_pop_comparison(const tf_analysis_pop *p);
size_t tf_analysis_pop_n_models(const tf_analysis_pop *p);
const tf_analysis_model *tf_analysis_pop_model(const tf_analysis_pop *p, size_t i);
/* The fitted model of highest posterior probability. */
size_t tf_analysis_pop_best(const tf_analysis_pop *p);
/* The models of p in order of decreasing posterior probability into order[0 .. n_models); ties
 * keep the candidates' order. */
void tf_analysis_pop_by_probability(const tf_analysis_pop *p, size_t *order);
/* The growth models among the fitted or failed candidates, in candidate order, with the summed
 * probability of their candidates. */
size_t tf_analysis_pop_n_growth(const tf_analysis_pop *p);
const tf_growth_type *tf_analysis_pop_growth(const tf_analysis_pop *p, size_t i);
double tf_analysis_pop_growth_probability(const tf_analysis_pop *p, size_t i);
/* The growth model of highest summed probability (index as above). */
size_t tf_analysis_pop_best_growth(const tf_analysis_pop *p);
/* Model-averaged abundance per year (n_years of the series) and trend. */
const tf_analysis_year *tf_analysis_pop_year(const tf_analysis_pop *p, size_t i);
const tf_analysis_trend *tf_analysis_pop_trend(const tf_analysis_pop *p);
/* Whether growth model g is density dependent (it has a carrying capacity K), so that its
 * projections level off near K whatever the past trend. */
int tf_analysis_growth_levels_off(const tf_growth_type *g);
/* The same over the last years (the fits' recent_years, tf_fit_set_recent_years). */
const tf_analysis_trend *tf_analysis_pop_trend_recent(const tf_analysis_pop *p);
/* The model-averaged projection from the last survey year. */
const tf_projection *tf_analysis_pop_projection(const tf_analysis_pop *p);
/* One row of the prior sensitivity (row 0: as fitted): the model-averaged risks of falling below
 * threshold k within tf_analysis_risk_years[y] years under the row's priors, from the projection
 * of each model's posterior draws reweighted by p'(theta) / p(theta) (resampled systematically,
 * Kitagawa 1996) with the row's model probabilities and the projection's own random numbers, so
 * that rows differ by the priors only; and the Pareto k of each model's reweighting (NaN where
 * the row leaves the model's priors as they are). */
typedef struct {
    double risk[TF_PROJECT_MAX_THRESHOLDS][TF_ANALYSIS_N_RISK_YEARS];   /* NAN beyond the horizon */
    double draws_k[TF_ANALYSIS_MAX_MODELS];
    int reliable;   /* no model's reweighting has a Pareto k above TF_PARETO_K_MAX */
} tf_analysis_sens_row;

/* The prior sensitivity of p's comparison; NULL when it was not asked for. */
const tf_sensitivity *tf_analysis_pop_sensitivity(const tf_analysis_pop *p);
/* Row row (< tf_sensitivity_n_rows) of the risks under the alternatives. */
const tf_analysis_sens_row *tf_analysis_pop_sens_row(const tf_analysis_pop *p, size_t row);

/* The scenarios projected for p with common random numbers, or NULL when none were asked. */
const tf_scenario_set *tf_analysis_pop_scenarios(const tf_analysis_pop *p);
/* The largest safe removal, or NULL when it was not asked. */
const tf_safe_removal *tf_analysis_pop_safe_removal(const tf_analysis_pop *p);
/* The status quo's net removal in animals a year (tf_scenario_status_quo_animals) and the survey
 * years it averages (0 when the survey records no removals). */
double tf_analysis_pop_status_quo(const tf_analysis_pop *p, size_t *n_years);
/* The checks of o's scenarios and safe removal against the candidates and the populations to
 * analyse (only, or every one of sv; neither: no population is checked): labels, a capacity on a candidate without one, from=
 * years, a threshold for the safe removal. TF_ERR_USAGE naming the problem. tf_analysis_run
 * makes them before the first fit. */
tf_status tf_analysis_check_management(const tf_survey *sv, const tf_series *only, const tf_analysis_options *o,
                                       tf_error *err);
/* Seconds the population took. */
double tf_analysis_pop_seconds(const tf_analysis_pop *p);

#endif
