/* What the commands that fit models share: checking that a series suits an observation model,
 * and building a model's prior set from the model files (defaults scaled by the survey, then
 * the user's --priors file). */
#ifndef TF_SETUP_H
#define TF_SETUP_H

#include "model/model.h"
#include "model/prior.h"
#include "survey/series.h"
#include "util/error.h"

/* Counts the observation model of m cannot have: a fractional count for a count model, a zero
 * for a model of positive values. TF_ERR_INVALID naming path and the count's input line. */
tf_status tf_setup_check_counts(const tf_model *m, const tf_series *s, const char *path, tf_error *err);

/* Whether at least one counting-error model of obs[0 .. n_obs) (n_obs = 0: every known one) suits
 * the counts of s (as tf_setup_check_counts): TF_ERR_INVALID naming the population and the first
 * model's reason otherwise, so that a population no candidate suits is refused before any fit. */
tf_status tf_setup_check_any_suits(const char *const *obs, size_t n_obs, const tf_series *s, const char *path,
                                   tf_error *err);

/* Median of count / effort over the surveyed years of s: the scale that survey-scaled priors
 * ("meanlog = survey", model_file.h) are centred on. NAN when no year is surveyed. */
double tf_setup_survey_median(const tf_series *s);

/* Builds the priors of m for series s. Each parameter takes its prior from the file at
 * priors_path when that file (may be NULL) has a section for it, else from the defaults: the
 * growth model's file (<growth>.ini) and the counting-error file (observation.ini). The user's
 * file may set any subset of the parameters, and only parameters of m. On success the caller
 * frees *out with tf_prior_set_free. Errors carry the model file's path and line; their status is
 * TF_ERR_INVALID (a model or priors file that cannot be read or used is an unusable input, exit
 * status 3 through tf_args_exit_code) or TF_ERR_NOMEM. */
tf_status tf_setup_priors(const tf_model *m, const tf_series *s, const char *priors_path,
                          tf_prior_set **out, tf_error *err);

/* tf_setup_priors with the default priors only (no --priors file), in the form of the priors
 * callback of the comparison and the analysis (compare.h); ctx is unused. */
tf_status tf_setup_default_priors(void *ctx, const tf_model *m, const tf_series *s, tf_prior_set **out,
                                  tf_error *err);

/* Builds, and frees, the default priors of every candidate (each growth model of growth[0 ..
 * n_growth) with each counting-error model of obs[0 .. n_obs); n = 0: every known one) for
 * series s, so that a model file that is missing or wrong is reported before the first fit
 * rather than when its candidate's turn comes. Errors as tf_setup_priors. */
tf_status tf_setup_check_candidates(const char *const *growth, size_t n_growth, const char *const *obs, size_t n_obs,
                                    const tf_series *s, tf_error *err);

#endif
