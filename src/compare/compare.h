/* Comparing models of one population by their marginal likelihoods: which growth x observation
 * models can be fitted to the counts and compared with each other, a PMMH fit and an evidence
 * estimate for each (models in parallel), Bayes factors against the best model and posterior
 * model probabilities, each with its Monte Carlo error. */
#ifndef TF_COMPARE_H
#define TF_COMPARE_H

#include <signal.h>
#include <stddef.h>

#include "compare/evidence.h"
#include "model/model.h"
#include "model/prior.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "survey/series.h"
#include "util/error.h"

/* Builds the prior set of model m for series s (e.g. from the model files); *out is freed by
 * the comparison with tf_prior_set_free. m's first-year prior has been set from the series
 * (tf_model_initial_from_series); the callback may replace it (tf_model_set_initial), the one
 * change to m it may make. Called from the thread that calls tf_compare_run. */
typedef tf_status (*tf_compare_priors_fn)(void *ctx, tf_model *m, const tf_series *s, tf_prior_set **out,
                                          tf_error *err);

/* What a progress callback hears: a model started, was fitted, or is done (or failed). */
typedef enum { TF_COMPARE_STARTED, TF_COMPARE_FITTED, TF_COMPARE_DONE, TF_COMPARE_FAILED } tf_compare_event;

/* Called from worker threads, one call at a time (the comparison holds a lock around it).
 * index is the candidate's index in the comparison. */
typedef void (*tf_compare_progress_fn)(void *ctx, size_t index, const char *model_name, tf_compare_event ev,
                                       double seconds);

/* The most candidates one comparison holds. */
#define TF_COMPARE_MAX_MODELS 64

typedef struct {
    /* Growth and observation model names; every pair is a candidate. n_growth = 0: every growth
     * model. n_obs = 0: every observation model, those that do not suit the counts or cannot be
     * compared with the others listed as excluded (see tf_compare_run). */
    const char *const *growth;
    size_t n_growth;
    const char *const *obs;
    size_t n_obs;
    /* Prior model weights by name: a full model name ("ricker+poisson") or a growth model name
     * (all its observation models); relative, the models not named get 1; NULL = all equal. */
    const char *const *weight_names;
    const double *weights;
    size_t n_weights;
    tf_pmmh_options fit;              /* fit.n_threads is ignored: see n_threads */
    tf_evidence_options evidence;     /* evidence.n_threads is ignored too */
    size_t n_threads;                 /* all threads; results do not depend on it */
    tf_compare_priors_fn priors;      /* required */
    void *priors_ctx;
    tf_compare_progress_fn progress;  /* may be NULL */
    void *progress_ctx;
} tf_compare_options;

/* Every growth and every observation model, the PMMH and evidence defaults, one thread, no
 * priors callback (the caller must set one). */
tf_compare_options tf_compare_default_options(void);

typedef struct tf_comparison tf_comparison;

/* Builds the candidates for series s (borrowed: it must outlive the comparison), fits every one
 * that can be fitted and estimates its evidence, then the Bayes factors and probabilities.
 *
 * Candidates are excluded, with the reason kept, when the counts do not suit the observation
 * model (a fractional count under a count model, a zero under the continuous log-normal), and,
 * when the observation models were not named, when the continuous log-normal density would be
 * compared with probabilities of whole counts (the rounded log-normal, lognormal-int, stands in
 * for it). A candidate whose fit or evidence fails (e.g. no finite likelihood found) is kept
 * with the error as its note. Models run on up to n_threads threads, each model's chains and
 * importance draws then on n_threads / (models at once) threads.
 *
 * Errors: TF_ERR_INVALID for unknown model names, bad options, a weight naming no candidate, or
 * nothing left to fit; TF_ERR_UNSUPPORTED when the named observation models mix continuous
 * densities with count probabilities; errors of the priors callback; TF_ERR_NOMEM;
 * TF_ERR_INTERRUPTED when stop was set. On success the caller frees *out with
 * tf_comparison_free; on failure *out is NULL. */
tf_status tf_compare_run(const tf_series *s, const tf_compare_options *opt, const volatile sig_atomic_t *stop,
                         tf_comparison **out, tf_error *err);
void tf_comparison_free(tf_comparison *c);   /* accepts NULL */

/* What the likelihoods of a comparison are: probabilities of whole counts, or densities of
 * continuous amounts. Everything in one comparison is on one scale. */
typedef enum { TF_COMPARE_COUNTS, TF_COMPARE_DENSITIES } tf_compare_scale;

/* The state of one candidate. */
typedef enum {
    TF_CANDIDATE_FITTED,    /* fitted, with an evidence estimate */
    TF_CANDIDATE_FAILED,    /* the fit or the evidence failed; the note says why */
    TF_CANDIDATE_EXCLUDED,  /* not fitted; the note says why */
} tf_candidate_state;

/* One candidate's comparison figures (meaningful for fitted candidates; NaN otherwise). */
typedef struct {
    double log_bf;          /* ln of p(y | this) / p(y | best): <= 0 */
    double log_bf_se;       /* sqrt(se_this^2 + se_best^2); 0 for the best model itself */
    double prior_weight;    /* normalised prior model probability */
    double prob;            /* posterior model probability */
    double prob_se;         /* its delta-method Monte Carlo error */
    double rhat_max;        /* largest R-hat over the parameters */
    double ess_min;         /* smallest bulk or tail ESS over the parameters */
} tf_candidate_figures;

const tf_series *tf_comparison_series(const tf_comparison *c);
tf_compare_scale tf_comparison_scale(const tf_comparison *c);
size_t tf_comparison_n_models(const tf_comparison *c);
/* Index of the fitted model with the largest evidence; tf_comparison_n_models when none was
 * fitted. */
size_t tf_comparison_best(const tf_comparison *c);
size_t tf_comparison_n_fitted(const tf_comparison *c);

/* Per candidate i < tf_comparison_n_models. Strings and objects are owned by the comparison. */
const char *tf_comparison_name(const tf_comparison *c, size_t i);         /* "ricker+poisson" */
const tf_growth_type *tf_comparison_growth(const tf_comparison *c, size_t i);
const tf_obs_type *tf_comparison_obs(const tf_comparison *c, size_t i);
tf_candidate_state tf_comparison_state(const tf_comparison *c, size_t i);
/* Why a candidate was excluded or failed, or a caution about a fitted one ("" when none). */
const char *tf_comparison_note(const tf_comparison *c, size_t i);
/* NULL unless fitted. */
const tf_model *tf_comparison_model(const tf_comparison *c, size_t i);
const tf_posterior *tf_comparison_posterior(const tf_comparison *c, size_t i);
const tf_fit *tf_comparison_fit(const tf_comparison *c, size_t i);
const tf_evidence *tf_comparison_evidence(const tf_comparison *c, size_t i);
const tf_candidate_figures *tf_comparison_figures(const tf_comparison *c, size_t i);
/* The importance draws behind the evidence estimate (tf_evidence_reweight); NULL unless fitted
 * and kept. */
const tf_evidence_draws *tf_comparison_evidence_draws(const tf_comparison *c, size_t i);

/* ---- the arithmetic, exposed for tests and for other callers ---- */

/* Posterior model probabilities from log evidences l[0..n) with standard errors se and prior
 * weights w (> 0, need not sum to 1; NULL = equal): p_i = w_i e^(l_i) / sum_j w_j e^(l_j).
 * prob_se by the delta method: dp_i / dl_j = p_i (delta_ij - p_j), so
 * Var p_i = p_i^2 [(1 - p_i)^2 se_i^2 + sum_(j != i) p_j^2 se_j^2], treating the estimates as
 * independent (they use independent random numbers). prob_se may be NULL. */
void tf_compare_probabilities(const double *l, const double *se, const double *w, size_t n, double *prob,
                              double *prob_se);

/* The Kass & Raftery (1995, JASA 90:773, section 3.2) reading of 2 ln B for B >= 1 (the
 * evidence for the better model): "not worth more than a bare mention" (0 - 2), "positive"
 * (2 - 6), "strong" (6 - 10), "very strong" (above 10). */
const char *tf_compare_kass_raftery(double two_ln_b);

#endif
