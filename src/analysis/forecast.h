/* Forecasts: the futures of each population of a survey from one of three sources, the
 * posterior of one model fitted by PMMH, the candidate models fitted, compared and averaged by
 * their posterior probabilities (the analysis of analysis.h), or parameter values given by
 * hand, projected forward with tf_project_run. Nothing here prints, writes files or chooses an
 * exit code; the command (cmd/cmd_forecast.c) builds the tables from the result. */
#ifndef TF_FORECAST_H
#define TF_FORECAST_H

#include <signal.h>
#include <stddef.h>
#include <stdint.h>

#include "analysis/analysis.h"
#include "model/model.h"
#include "project/project.h"
#include "sampler/fit.h"
#include "survey/survey.h"
#include "util/error.h"

/* Where the futures come from. */
typedef enum {
    TF_FORECAST_NONE = 0,  /* refused: nothing to project from */
    TF_FORECAST_MODEL,     /* the posterior of one model fitted by PMMH */
    TF_FORECAST_AVERAGE,   /* the candidates' posteriors averaged by their probabilities */
    TF_FORECAST_FIXED,     /* one draw of given parameter values */
} tf_forecast_source;

/* The most --parameter values one forecast takes. */
#define TF_FORECAST_MAX_FIXED 32

typedef struct {
    tf_forecast_source source;
    /* Every source: the projection (horizon, runs, thresholds, declines; its start and stop
     * are set from start and the stop flag below), seed and population (NULL: every
     * population of the survey; FIXED takes the survey's only one). MODEL and AVERAGE also:
     * fit (the sampler settings of every fit; seed and thread count are replaced by seed and
     * n_threads), n_threads, priors and priors_ctx (required), estimates. AVERAGE also: the
     * candidates (growth, obs, obs_auto) and the marginal likelihood's settings (evidence). */
    tf_analysis_options run;
    /* MODEL: the growth and counting-error model by name (both required). FIXED: growth NULL
     * picks the only growth model whose drift parameters are exactly the names given; obs may
     * be NULL (counting-error values then name no parameter). AVERAGE: unused (the candidates
     * are in run). */
    const char *growth, *obs;
    /* FIXED: the values by parameter name, natural scale: every drift parameter of the growth
     * model and the process-noise sd sigma (>= 0; 0 projects without noise); counting-error
     * values are accepted and do not enter a projection (tf_forecast_n_ignored). */
    size_t n_fixed;
    const char *fixed_names[TF_FORECAST_MAX_FIXED];
    double fixed_values[TF_FORECAST_MAX_FIXED];
    /* The current abundance, NAN when not given. FIXED: the one draw's start (NAN: the last
     * surveyed count / effort of the population). MODEL and AVERAGE: a what-if, every run starts
     * there instead of its draw's latent abundance in the last survey year (needs one
     * population). */
    double start;
} tf_forecast_options;

/* Fills o for source with the defaults of the analysis (tf_analysis_options_init: seed 1, one
 * thread, a 50-year projection with thresholds of 50, 20 and 10 % of the current abundance, its
 * candidates and sampler), no model names, no values, start NAN. MODEL callers that want the
 * defaults of a lone fit set run.fit = tf_pmmh_default_options(). TF_OK (fills err only on a
 * bug, as tf_analysis_options_init). */
tf_status tf_forecast_options_init(tf_forecast_options *o, tf_forecast_source source, tf_error *err);

/* The checks of o that need no survey: the source, the model names, the fixed values against
 * the growth model's ranges, the projection's and the sampler's settings, the start. Every
 * problem is added to err (so that all are reported at once); returns TF_ERR_USAGE when any is
 * found, else TF_OK. tf_forecast_run makes them first, so that nothing long runs on bad
 * settings. */
tf_status tf_forecast_check_options(const tf_forecast_options *o, tf_error *err);

typedef struct tf_forecast tf_forecast;

/* One population's forecast, as tf_forecast_population hands it out; every pointer is borrowed
 * from the tf_forecast and lives as long as it does. */
typedef struct {
    const tf_series *series;   /* NULL for a FIXED forecast without a survey */
    const char *label;         /* the population's label; "" = unnamed */
    int year0;                 /* calendar year of year 0 of the projection (the last survey year;
                                * FIXED: the last year with a count); TF_PROJECTION_NO_YEAR when
                                * there is no survey */
    /* MODEL and FIXED: the joined model (FIXED: it lays out the parameters; its counting-error
     * model is obs, or Poisson); NULL for AVERAGE. */
    const tf_model *model;
    /* FIXED: the values in the model's parameter order (NAN where not given) and the start, with
     * the count and effort it comes from when it was read from the survey (NAN otherwise). */
    const double *theta;
    double start, start_count, start_effort;
    const tf_fit *fit;             /* MODEL: the fit; else NULL */
    const tf_analysis_pop *pop;    /* AVERAGE: the comparison and the averages; else NULL */
    const tf_projection *projection;
    /* The scenarios (run.scenarios) projected with common random numbers, NULL when none; the
     * largest safe removal, NULL when not asked; the status quo's net removal in animals a year
     * and the survey years it averages (0: the survey records none). */
    const tf_scenario_set *scenarios;
    const tf_safe_removal *safe;
    double status_quo;
    size_t status_quo_years;
    /* 1 when every fit the projection draws from (MODEL: the fit; AVERAGE: every candidate of
     * positive probability) passed the convergence checks (tf_fit_converged); FIXED: 1. */
    int converged;
} tf_forecast_pop;

/* Runs the forecast of o on survey sv (may be NULL for a FIXED forecast with a start; borrowed,
 * must outlive the result). Checks o first (tf_forecast_check_options), then sets up every
 * population before the first fit (models, first-year priors, priors, posteriors), so that a
 * problem in the last population is reported before any long run; then fits (MODEL: one
 * population after another with the streams of a lone fit; AVERAGE: tf_analysis_run) and
 * projects. A MODEL projection draws from tf_project_stream(seed, label), the stream of the
 * analysis's projection of the same population, so that AVERAGE over the one candidate gives
 * MODEL's futures digit for digit; a FIXED one from its own stream (seed, "forecast", label).
 * stop: polled by the fits and the projection (may be NULL). progress (may be NULL) hears
 * AVERAGE's analysis events, and for MODEL a TF_ANALYSIS_STARTED event naming the model before
 * each population's fit and TF_ANALYSIS_DONE after its projection.
 *
 * On success *out holds the result (free with tf_forecast_free). Errors, each with its message
 * in err and *out NULL:
 *   TF_ERR_USAGE       bad options (tf_forecast_check_options), an unknown population, several
 *                      populations where one is needed (FIXED, or a start with a posterior)
 *   TF_ERR_INVALID     the input cannot be used for this model: counts it cannot have, no
 *                      surveyed year, a model or priors file (the priors callback) that cannot
 *                      be used, whatever status the callee gave; AVERAGE: no candidate suits
 *   TF_ERR_RANGE       FIXED: no surveyed count to start from, or a last count of 0
 *   TF_ERR_NUMERIC     a fit could not start (no finite likelihood), every candidate failed
 *   TF_ERR_NOMEM, TF_ERR_INTERRUPTED
 * that is, the statuses the fit command's own steps give for the same failures. */
tf_status tf_forecast_run(const tf_survey *sv, const tf_forecast_options *o, const volatile sig_atomic_t *stop,
                          tf_analysis_progress_fn progress, void *progress_ctx, tf_forecast **out, tf_error *err);
void tf_forecast_free(tf_forecast *f); /* accepts NULL */

/* The options the forecast ran with (a copy; the names are borrowed from the caller's). */
const tf_forecast_options *tf_forecast_options_of(const tf_forecast *f);
size_t tf_forecast_n_populations(const tf_forecast *f);
const tf_forecast_pop *tf_forecast_population(const tf_forecast *f, size_t i);
/* FIXED: the counting-error values given, which do not enter a projection (names borrowed from
 * the options), for the command to say so. */
size_t tf_forecast_n_ignored(const tf_forecast *f);
const char *tf_forecast_ignored(const tf_forecast *f, size_t i);
/* 1 when every population's forecast converged (tf_forecast_pop.converged). */
int tf_forecast_all_converged(const tf_forecast *f);
/* AVERAGE: the simulated futures given to candidate i of the population (0 for a candidate of
 * probability 0). */
size_t tf_forecast_candidate_runs(const tf_forecast_pop *p, size_t i);

#endif
