/* The model-comparison table. */
#include "tables/models_table.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "compare/pareto.h"

enum {
    C_POP, C_MODEL, C_GROWTH, C_OBS, C_SCALE, C_STATUS, C_LOG_ML, C_LOG_ML_SE, C_CHECK, C_CHECK_SE, C_CHECK_Z, C_BF, C_LN_BF,
    C_LN_BF_SE, C_TWO_LN_B, C_READING, C_PRIOR, C_PROB, C_PROB_SE, C_K, C_K_CHECK, C_W_ESS, C_PARTICLES, C_PARTICLES_MEAN, C_RHAT,
    C_ESS, C_NOTE, N_COLS
};

/* Each column's CSV name, its legend and kind; the workbook's labels follow in labels[]. */
static const struct {
    const char *header, *legend;
    tf_col_kind kind;
} columns[N_COLS] = {
    {"population", "the population's label", TF_COL_TEXT},
    {"model", "candidate model, growth+observation", TF_COL_TEXT},
    {"growth", "growth model of log abundance", TF_COL_TEXT},
    {"observation", "counting-error model", TF_COL_TEXT},
    {"likelihood_of", "what the marginal likelihood is of: 'whole counts' (a probability, the count models and "
                      "lognormal-int) or 'continuous amounts' (a density, the continuous log-normal); only one "
                      "kind is compared in a table",
     TF_COL_TEXT},
    {"status", "fitted, failed, or excluded (not fitted; the note says why)", TF_COL_TEXT},
    {"log_ml", "log marginal likelihood ln p(counts | model) by importance sampling squared with the adapted "
               "Student-t mixture",
     TF_COL_NUMBER},
    {"log_ml_mcse", "Monte Carlo standard error of log_ml (delta method)", TF_COL_NUMBER},
    {"log_ml_check", "the same from a second importance density (Student-t, 3 degrees of freedom, centred on the "
                     "posterior median, twice as wide)",
     TF_COL_NUMBER},
    {"log_ml_check_mcse", "Monte Carlo standard error of log_ml_check", TF_COL_NUMBER},
    {"check_z", "(log_ml - log_ml_check) / their combined standard error; beyond +-3 the two disagree",
     TF_COL_NUMBER},
    {"bayes_factor", "Bayes factor against the best model, p(counts | model) / p(counts | best)", TF_COL_NUMBER},
    {"ln_bf", "natural log of bayes_factor", TF_COL_NUMBER},
    {"ln_bf_mcse", "Monte Carlo standard error of ln_bf", TF_COL_NUMBER},
    {"two_ln_b", "2 ln of the Bayes factor of the best model over this one (Kass & Raftery 1995 scale)",
     TF_COL_NUMBER},
    {"reading", "Kass & Raftery (1995) reading of two_ln_b: 0-2 not worth more than a bare mention, 2-6 positive, "
                "6-10 strong, above 10 very strong evidence for the best model",
     TF_COL_TEXT},
    {"prior_prob", "prior model probability", TF_COL_PROBABILITY},
    {"model_prob", "posterior model probability", TF_COL_PROBABILITY},
    {"model_prob_mcse", "Monte Carlo standard error of model_prob (delta method from the log_ml standard errors)",
     TF_COL_NUMBER},
    {"pareto_k", "Pareto k of the importance weights (above 0.7: unreliable)", TF_COL_NUMBER},
    {"pareto_k_check", "Pareto k of the second density's weights", TF_COL_NUMBER},
    {"weight_ess", "effective sample size of the importance weights, (sum w)^2 / sum w^2", TF_COL_NUMBER},
    {"particles", "base particle count of the likelihood estimates in the importance sampling", TF_COL_INTEGER},
    {"particles_mean", "particles spent per importance draw, pilot runs included (each draw sets its own count)",
     TF_COL_NUMBER},
    {"max_r_hat", "largest R-hat of the fit's parameters (want <= 1.01)", TF_COL_NUMBER},
    {"min_ess", "smallest bulk or tail ESS of the fit's parameters (want >= 400)", TF_COL_NUMBER},
    {"note", "why a model was excluded or failed, or a caution", TF_COL_TEXT},
};

static const char *const labels[N_COLS] = {
    "Population", "Model", "Growth model", "Counting error", "Likelihood of", "Status", "Log ML",
    "Log ML MCSE", "Log ML check", "Log ML check MCSE", "Check z", "Bayes factor", "Log Bayes factor",
    "Log Bayes factor MCSE", "Twice log Bayes factor", "Reading", "Prior probability", "Model probability",
    "Model probability MCSE", "Pareto k", "Pareto k check", "Weight ESS", "Particles", "Particles per draw",
    "Max R-hat", "Min ESS", "Note",
};

static int rank(const tf_comparison *c, size_t i)
{
    switch (tf_comparison_state(c, i)) {
    case TF_CANDIDATE_FITTED: return 0;
    case TF_CANDIDATE_FAILED: return 1;
    default: return 2;
    }
}

void tf_compare_table_order(const tf_comparison *c, size_t *out)
{
    /* An insertion sort: at most TF_COMPARE_MAX_MODELS rows, and it is stable, so ties and the
     * unfitted keep the candidates' order. */
    size_t n = tf_comparison_n_models(c);
    for (size_t i = 0; i < n; i++) {
        size_t k = i;
        while (k > 0) {
            size_t a = out[k - 1], b = i;
            int ra = rank(c, a), rb = rank(c, b);
            int before = rb < ra;
            if (rb == ra && rb == 0)
                before = tf_comparison_evidence(c, b)->main.log_ml > tf_comparison_evidence(c, a)->main.log_ml;
            if (!before)
                break;
            out[k] = out[k - 1];
            k--;
        }
        out[k] = i;
    }
}

static const char *state_name(tf_candidate_state s)
{
    return s == TF_CANDIDATE_FITTED ? "fitted" : s == TF_CANDIDATE_FAILED ? "failed" : "excluded";
}

tf_table *tf_compare_table(const tf_comparison *c, const char *population, tf_error *err)
{
    tf_table *t = tf_table_new(TF_COMPARE_TABLE_NAME, err);
    if (!t)
        return NULL;
    size_t n = tf_comparison_n_models(c);
    size_t *order = malloc((n ? n : 1) * sizeof *order);
    int ok = order != NULL;
    if (!ok)
        tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    for (size_t k = 0; ok && k < N_COLS; k++)
        ok = tf_table_add_column(t, columns[k].header, columns[k].legend, columns[k].kind, NULL, err) == TF_OK &&
             tf_table_set_label(t, k, labels[k], err) == TF_OK;
    if (ok) {
        tf_compare_table_order(c, order);
        int unreliable = 0, disagree = 0, unconverged = 0;
        for (size_t r = 0; ok && r < n; r++) {
            size_t i = order[r];
            size_t row;
            ok = tf_table_add_row(t, &row, err) == TF_OK &&
                 tf_table_set_text(t, row, C_POP, population, err) == TF_OK &&
                 tf_table_set_text(t, row, C_MODEL, tf_comparison_name(c, i), err) == TF_OK &&
                 tf_table_set_text(t, row, C_GROWTH, tf_comparison_growth(c, i)->name, err) == TF_OK &&
                 tf_table_set_text(t, row, C_OBS, tf_comparison_obs(c, i)->name, err) == TF_OK &&
                 tf_table_set_text(t, row, C_SCALE, tf_comparison_obs(c, i)->needs_integer ? "whole counts"
                                                                                            : "continuous amounts",
                                   err) == TF_OK &&
                 tf_table_set_text(t, row, C_STATUS, state_name(tf_comparison_state(c, i)), err) == TF_OK &&
                 tf_table_set_text(t, row, C_NOTE, tf_comparison_note(c, i), err) == TF_OK;
            const tf_evidence *ev = tf_comparison_evidence(c, i);
            if (!ok || !ev)
                continue;
            const tf_candidate_figures *f = tf_comparison_figures(c, i);
            tf_table_set_number(t, row, C_LOG_ML, ev->main.log_ml);
            tf_table_set_number(t, row, C_LOG_ML_SE, ev->main.se);
            tf_table_set_number(t, row, C_CHECK, ev->check.log_ml);
            tf_table_set_number(t, row, C_CHECK_SE, ev->check.se);
            tf_table_set_number(t, row, C_CHECK_Z, ev->z_diff);
            tf_table_set_number(t, row, C_BF, exp(f->log_bf));
            tf_table_set_number(t, row, C_LN_BF, f->log_bf);
            tf_table_set_number(t, row, C_LN_BF_SE, f->log_bf_se);
            /* 0 - (-2 x): the best model's log_bf is +0, and -2 x 0 would print as -0. */
            tf_table_set_number(t, row, C_TWO_LN_B, 0.0 - 2.0 * f->log_bf);
            tf_table_set_number(t, row, C_PRIOR, f->prior_weight);
            tf_table_set_number(t, row, C_PROB, f->prob);
            tf_table_set_number(t, row, C_PROB_SE, f->prob_se);
            tf_table_set_number(t, row, C_K, ev->main.pareto_k);
            tf_table_set_number(t, row, C_K_CHECK, ev->check.pareto_k);
            tf_table_set_number(t, row, C_W_ESS, ev->main.ess);
            tf_table_set_number(t, row, C_PARTICLES, (double)ev->n_particles);
            tf_table_set_number(t, row, C_PARTICLES_MEAN, ev->mean_particles);
            tf_table_set_number(t, row, C_RHAT, f->rhat_max);
            tf_table_set_number(t, row, C_ESS, f->ess_min);
            ok = tf_table_set_text(t, row, C_READING,
                                   i == tf_comparison_best(c) ? "best model" : tf_compare_kass_raftery(-2.0 * f->log_bf),
                                   err) == TF_OK;
            if (ok && !(ev->main.pareto_k <= TF_PARETO_K_MAX)) {
                ok = tf_table_set_warning(t, row, C_K, err) == TF_OK;
                unreliable = 1;
            }
            if (ok && !(ev->check.pareto_k <= TF_PARETO_K_MAX)) {
                ok = tf_table_set_warning(t, row, C_K_CHECK, err) == TF_OK;
                unreliable = 1;
            }
            if (ok && !ev->agree) {
                ok = tf_table_set_warning(t, row, C_CHECK_Z, err) == TF_OK;
                disagree = 1;
            }
            if (ok && !(f->rhat_max <= TF_FIT_RHAT_MAX)) {
                ok = tf_table_set_warning(t, row, C_RHAT, err) == TF_OK;
                unconverged = 1;
            }
            if (ok && !(f->ess_min >= TF_FIT_ESS_MIN)) {
                ok = tf_table_set_warning(t, row, C_ESS, err) == TF_OK;
                unconverged = 1;
            }
        }
        const char *label = population ? population : "";
        ok = ok &&
             tf_table_add_notef(t, TF_NOTE_INFO, err, "Model comparison%s%s: marginal likelihoods by importance "
                                "sampling squared (Tran, Scharth, Pitt & Kohn 2014) with particle-filter likelihood "
                                "estimates; posterior probabilities and their Monte Carlo errors by the delta method.",
                                label[0] ? " for " : "", label) == TF_OK &&
             tf_table_add_note(t, TF_NOTE_INFO,
                               tf_comparison_scale(c) == TF_COMPARE_COUNTS
                                   ? "Likelihoods are probabilities of the whole counts. Log-normal counting error "
                                     "enters as lognormal-int, the log-normal rounded to whole counts; the "
                                     "continuous log-normal density is not compared with count models."
                                   : "Likelihoods are densities of continuous amounts (the counts are not whole "
                                     "numbers), so only the continuous log-normal counting error is compared.",
                               err) == TF_OK;
        if (ok && unreliable)
            ok = tf_table_add_note(t, TF_NOTE_CAUTION,
                                   "Some importance weights have Pareto k above 0.7: those marginal likelihoods "
                                   "and their standard errors are unreliable.",
                                   err) == TF_OK;
        if (ok && disagree)
            ok = tf_table_add_note(t, TF_NOTE_CAUTION,
                                   "For some models the two importance densities disagree by more than 3 standard "
                                   "errors: treat those marginal likelihoods with caution.",
                                   err) == TF_OK;
        if (ok && unconverged)
            ok = tf_table_add_note(t, TF_NOTE_CAUTION,
                                   "Some fits did not reach R-hat <= 1.01 and ESS >= 400: run longer chains.",
                                   err) == TF_OK;
    }
    free(order);
    if (!ok) {
        tf_table_free(t);
        return NULL;
    }
    return t;
}
