/* The tables of fitted models, the same from `fit`, `compare`, `forecast`, `analyze` and a batch:
 * abundance per year, annual change, parameter summaries, raw draws, per-model diagnostics and
 * per-chain sampler records. Each table starts with `population`, then `model`; the columns
 * come from the vocabulary (tables/columns.h). Only lays out what the fits hold. */
#ifndef TF_FIT_TABLES_H
#define TF_FIT_TABLES_H

#include <stddef.h>

#include "analysis/analysis.h"
#include "export/table.h"
#include "model/prior.h"
#include "sampler/fit.h"
#include "survey/series.h"
#include "util/error.h"

/* One model as the tables see it. */
typedef struct {
    const char *name;             /* "ricker+poisson" */
    const tf_fit *fit;            /* NULL when it was not fitted or its fit failed */
    int excluded;                 /* not fitted by design (unsuited to the counts): no diagnostics row */
    const char *note;             /* why it failed or was excluded; NULL or "" = none */
    double probability;           /* posterior model probability; NAN when the models were not compared */
    double pareto_k;              /* of its marginal likelihood; NAN when none was estimated */
    const tf_prior_set *priors;   /* may be NULL: the prior column is then blank */
} tf_tables_model;

/* What every table of one population shares. */
typedef struct {
    const char *population;       /* the population's label */
    const tf_series *series;
    int omit_seconds;             /* leave the seconds blank, so that files compare byte for byte */
} tf_tables_context;


/* The label a population has in every table: its own, or fallback (the survey's name) when the
 * survey has no population column. */
const char *tf_tables_population(const tf_series *s, const char *fallback);

/* Room for any unit text below: the longest effort name (TF_SERIES_EFFORT_NAME_MAX characters,
 * up to 4 bytes each) and the words around it. */
#define TF_TABLES_UNIT_SIZE 192

/* The unit of the abundances of s, written into buf (size bytes) and returned: TF_UNIT_ANIMALS
 * when every surveyed year's effort is 1 and the counted fraction is 1 (TF_UNIT_COUNT when it is
 * below 1); else TF_UNIT_PER_EFFORT, or "count units per NAME"
 * when the survey names its unit of effort (tf_series_effort_name). */
const char *tf_tables_unit(const tf_series *s, char *buf, size_t size);
/* The same with a capital first letter, for chart axes: "Animals", "Count units per NAME". */
const char *tf_tables_unit_title(const tf_series *s, char *buf, size_t size);
/* What a figure per effort is per, for sentences: "per unit of effort", or "per NAME". */
const char *tf_tables_per_what(const tf_series *s, char *buf, size_t size);
/* Whether a surveyed year's effort is not 1: abundances are then per unit of effort. */
int tf_tables_per_effort(const tf_series *s);

/* Each builder returns a new table named by its file stem ("abundance", "change", "parameters",
 * "draws", "diagnostics", "chains") in *out (the caller frees), or fills err (TF_ERR_NOMEM). */

/* Counts and estimated abundance per year under model (its name or "average"); the years are the
 * model average's (analysis.h), or a fit's in the same form. */
tf_status tf_tables_abundance(const tf_tables_context *c, const char *model, const tf_analysis_year *years, size_t n,
                              tf_table **out, tf_error *err);
/* The same from a fit's own years. */
tf_status tf_tables_abundance_fit(const tf_tables_context *c, const tf_tables_model *m, tf_table **out, tf_error *err);

/* The trends: per fitted model a row for the whole period and one for the recent years
 * (tf_fit_trend, tf_fit_trend_recent), then the average's two rows when average is not NULL
 * (average[0] the whole period, average[1] the recent years; R-hat and ESS NaN). */
tf_status tf_tables_change_of(const tf_tables_context *c, const tf_tables_model *models, size_t n,
                              const tf_fit_trend_summary *average, tf_table **out, tf_error *err);
tf_status tf_tables_parameters(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                               tf_error *err);
/* A column for every parameter of every model the program knows, so that the same table of
 * every population and command has one header; blank where a model lacks the parameter. */
tf_status tf_tables_draws(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                          tf_error *err);
/* The latent abundance of every year held with every kept draw (exp of the path the particle
 * filter drew with it), one row per draw and year: the posterior paths from which the abundance
 * and the trends are summarised, for readers who compute their own summaries. Only the fitted
 * models of models[0 .. n). */
tf_status tf_tables_paths(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                          tf_error *err);
tf_status tf_tables_diagnostics(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                                tf_error *err);
tf_status tf_tables_chains(const tf_tables_context *c, const tf_tables_model *models, size_t n, tf_table **out,
                           tf_error *err);

/* Thresholds for flagging a sampler diagnostic. R-hat and ESS use TF_FIT_RHAT_MAX and
 * TF_FIT_ESS_MIN (sampler/fit.h). A chain accepting fewer than 5 % of its proposals is
 * sticky: random-walk PMMH on a few parameters with a well-tuned particle count accepts about
 * 10-25 % (Sherlock, Thiery, Roberts & Rosenthal 2015, Annals of Statistics 43:238, section 3;
 * the 5 % floor is common practice, no source). A log-likelihood SD above 2 makes the chain
 * mix very poorly (Doucet, Pitt, Deligiannidis & Kohn 2015, Biometrika 102:295, section 4). */
#define TF_TABLES_ACCEPT_MIN 0.05
#define TF_TABLES_LOGLIK_SD_MAX 2.0

#endif
