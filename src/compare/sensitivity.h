/* How much a comparison's verdict depends on the priors: the marginal likelihood of every fitted
 * candidate again under other priors, by reweighting the importance draws of its evidence
 * estimate (evidence.h, tf_evidence_reweight) instead of fitting again, the model probabilities
 * under each alternative, and how far the best model's probability moves.
 *
 * Marginal likelihoods stay sensitive to the width of the priors however many years of counts
 * there are: twice as wide a prior on a parameter only one model has lowers that model's log
 * p(y) by about ln 2 (Lindley 1957, Biometrika 44:187; Kass & Raftery 1995, JASA 90:773,
 * section 5), while the posteriors hardly move. */
#ifndef TF_SENSITIVITY_H
#define TF_SENSITIVITY_H

#include <signal.h>
#include <stddef.h>

#include "compare/compare.h"
#include "compare/evidence.h"
#include "model/model.h"
#include "model/prior.h"
#include "survey/series.h"
#include "util/error.h"

/* Builds the alternative priors of candidate model m (fitted with the priors fitted) for series
 * s into *out (freed by the sensitivity with tf_prior_set_free). Called from the thread that
 * calls tf_sensitivity_run. */
typedef tf_status (*tf_sensitivity_priors_fn)(void *ctx, const tf_model *m, const tf_series *s,
                                              const tf_prior_set *fitted, tf_prior_set **out, tf_error *err);

/* One alternative set of priors. Either a change of scale (priors == NULL): the prior of the
 * parameter named param ("" = of every parameter) has its scale multiplied by factor
 * (tf_prior_rescale), in every candidate that has it; or a callback that builds each
 * candidate's priors (the user's folders of model files). */
typedef struct {
    char label[64];
    char param[32];      /* "" = every parameter */
    double factor;
    tf_sensitivity_priors_fn priors;
    void *ctx;
} tf_sensitivity_alternative;

/* The most alternatives one run takes (the standard ones and the user's). */
#define TF_SENSITIVITY_MAX_ALTERNATIVES 64

/* The growth model whose parameters every other model shares (with sigma and the counting
 * error's): the one-at-a-time alternatives are for the parameters beyond it. */
#define TF_SENSITIVITY_BASELINE "exponential"

/* The standard alternatives for comparison c, into out (room for max; returns how many, at most
 * max): for each parameter name of the fitted candidates that the baseline growth model (with
 * sigma) does not have, in candidate and parameter order, its scale halved and then doubled
 * ("K x0.5", "K x2"); then every scale halved and doubled together ("all x0.5", "all x2"). */
size_t tf_sensitivity_standard(const tf_comparison *c, tf_sensitivity_alternative *out, size_t max);

typedef struct {
    /* Where the reweighted estimate cannot be trusted (Pareto k above TF_PARETO_K_MAX, or draws
     * that the new prior covers and the old did not), estimate the evidence again under the
     * new prior with these settings (refit = 1), seeding the importance density with the
     * model's PMMH draws; else (refit = 0) keep the row, flagged unreliable. */
    int refit;
    tf_evidence_options evidence;
} tf_sensitivity_options;

/* How one candidate's figure under one alternative was had. */
typedef enum {
    TF_SENS_REWEIGHTED,   /* the kept draws, reweighted; Pareto k acceptable */
    TF_SENS_REFITTED,     /* a new importance-sampling run under the alternative */
    TF_SENS_UNRELIABLE,   /* reweighted, but Pareto k too high or draws uncovered, and not refitted */
    TF_SENS_FAILED,       /* no estimate (the note says why) */
    TF_SENS_NOT_FITTED,   /* the candidate was not fitted in the comparison */
} tf_sens_state;

typedef struct {
    tf_sens_state state;
    double log_ml, log_ml_se, pareto_k;
    double prob, prob_se;   /* model probability under the alternative (0 when not estimated) */
    int changed;            /* 1 when the alternative changes this candidate's priors */
} tf_sens_cell;

typedef struct tf_sensitivity tf_sensitivity;

/* Runs the alternatives alt[0 .. n_alt) on comparison c (borrowed: it must outlive the result).
 * Row 0 of the result is the comparison itself ("fitted"), rows 1 .. n_alt the alternatives.
 * A scale alternative naming a parameter no candidate has changes nothing (its rows equal row
 * 0). Errors: TF_ERR_INVALID (too many alternatives, a bad factor), the callbacks' errors
 * (naming the alternative), TF_ERR_NOMEM, TF_ERR_INTERRUPTED (stop, polled between refits).
 * On success the caller frees *out with tf_sensitivity_free; on failure *out is NULL. */
tf_status tf_sensitivity_run(const tf_comparison *c, const tf_sensitivity_alternative *alt, size_t n_alt,
                             const tf_sensitivity_options *opt, const volatile sig_atomic_t *stop,
                             tf_sensitivity **out, tf_error *err);
void tf_sensitivity_free(tf_sensitivity *s);   /* accepts NULL */

/* Rows (row 0 = as fitted) and candidates (as in the comparison). */
size_t tf_sensitivity_n_rows(const tf_sensitivity *s);
size_t tf_sensitivity_n_models(const tf_sensitivity *s);
const char *tf_sensitivity_label(const tf_sensitivity *s, size_t row);   /* "fitted" for row 0 */
/* Whether row is a change of scale (or row 0), as against a user's set of priors. */
int tf_sensitivity_is_scale(const tf_sensitivity *s, size_t row);
const char *tf_sensitivity_model_name(const tf_sensitivity *s, size_t model);   /* the comparison's */
const tf_sens_cell *tf_sensitivity_cell(const tf_sensitivity *s, size_t row, size_t model);
/* Why a cell failed or is unreliable ("" when nothing to say). */
const char *tf_sensitivity_note(const tf_sensitivity *s, size_t row, size_t model);
/* The candidate of highest probability in a row; n_models when none has one. */
size_t tf_sensitivity_best(const tf_sensitivity *s, size_t row);
/* Over every row: the smallest and largest probability of row 0's best model, and whether any
 * row has another best model. Rows whose cells are unreliable or failed count too (the table
 * flags them). */
void tf_sensitivity_range(const tf_sensitivity *s, double *prob_min, double *prob_max, int *best_changes);

/* log p'(theta) - log p(theta) for candidate model under row's priors against its fitted ones
 * (natural scale; -INFINITY where the new prior is 0, +INFINITY where only the old one is), for
 * reweighting the candidate's posterior draws. 0 for row 0 or an unchanged candidate. */
double tf_sensitivity_log_ratio(const tf_sensitivity *s, size_t row, size_t model, const double *theta);

#endif
