/* What the commands that fit models share: checking that a series suits an observation model,
 * and building a model's prior set from the model files (defaults scaled by the survey, then
 * the user's --prior-file). */
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
 * priors_path (--prior-file) when that file (may be NULL) has a section for it, else from the
 * defaults: the growth model's file (<growth>.ini) and the counting-error file (observation.ini).
 * The user's file may set any subset of the parameters, and only parameters of m, and may not
 * name another growth model. On success the caller frees *out with tf_prior_set_free. Errors
 * carry the model file's path and line; their status is TF_ERR_INVALID (a model or priors file
 * that cannot be read or used is an unusable input, exit status 3 through tf_args_exit_code) or
 * TF_ERR_NOMEM. */
tf_status tf_setup_priors(const tf_model *m, const tf_series *s, const char *priors_path,
                          tf_prior_set **out, tf_error *err);

/* What the user set for the priors of the candidate models of a comparison (compare, analyze,
 * forecast --average): a priors file (--prior-file) and the first year's log-abundance prior
 * (--prior x1_mean=..,x1_sd=..). Zero it, then set x1_mean and x1_sd to NAN where not given. */
typedef struct {
    const char *prior_file;  /* NULL: none */
    double x1_mean, x1_sd;   /* NAN: not given; x1_sd > 0 */
} tf_setup_user;

/* The priors callback of the comparison and the analysis (compare.h) with the user's settings;
 * ctx is a tf_setup_user, or NULL for the defaults only. The first-year prior given replaces
 * m's. The priors file applies to every candidate of the growth model its [model] name names
 * (to every candidate when it names none): each takes the file's sections for the parameters it
 * has, the defaults for the others; candidates of other growth models keep the defaults. Errors
 * as tf_setup_priors. */
tf_status tf_setup_user_priors(void *ctx, tf_model *m, const tf_series *s, tf_prior_set **out, tf_error *err);

/* Builds, and frees, the priors of every candidate (each growth model of growth[0 .. n_growth)
 * with each counting-error model of obs[0 .. n_obs); n = 0: every known one) for series s as
 * tf_setup_user_priors does with user (may be NULL), so that a model file that is missing or
 * wrong is reported before the first fit rather than when its candidate's turn comes. With a
 * priors file, also TF_ERR_INVALID when the file names a growth model that is not a candidate,
 * or has a section for a parameter that none of the candidates it applies to has. Errors
 * otherwise as tf_setup_priors. */
tf_status tf_setup_check_candidates(const tf_setup_user *user, const char *const *growth, size_t n_growth,
                                    const char *const *obs, size_t n_obs, const tf_series *s, tf_error *err);

#endif
