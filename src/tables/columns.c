/* The vocabulary of the output tables; see columns.h and docs/tables.md. */
#include "tables/columns.h"

#include <assert.h>
#include <stdio.h>


#define N TF_C_COUNT_OF_COLUMNS

static const tf_column vocabulary[N] = {
    [TF_C_POPULATION] = {"population", "Population", "the population's label", TF_COL_TEXT},
    [TF_C_MODEL] = {"model", "Model", "growth+counting-error model; 'average' for the average over the models",
                    TF_COL_TEXT},
    [TF_C_STATUS] = {"status", "Status", "how far the work on the row got", TF_COL_TEXT},
    [TF_C_PERIOD] = {"period", "Period", "whole: every year of the survey; recent: its last years", TF_COL_TEXT},
    [TF_C_YEAR] = {"year", "Year", "calendar year", TF_COL_YEAR},
    [TF_C_YEARS_AHEAD] = {"years_ahead", "Years ahead", "years after the last survey year (0 = that year)",
                          TF_COL_INTEGER},
    [TF_C_FIRST_YEAR] = {"first_year", "First year", "first year of the survey", TF_COL_YEAR},
    [TF_C_LAST_YEAR] = {"last_year", "Last year", "last year of the survey", TF_COL_YEAR},
    [TF_C_YEARS_SURVEYED] = {"years_surveyed", "Years surveyed", "years with a count", TF_COL_INTEGER},
    [TF_C_COUNT] = {"count", "Count", "the survey's count (blank = not surveyed)", TF_COL_NUMBER},
    [TF_C_EFFORT] = {"effort", "Effort", "survey effort of the year in the survey's units (blank = not surveyed)",
                     TF_COL_NUMBER},
    [TF_C_COUNT_PER_EFFORT] = {"count_per_effort", "Count per effort", "count divided by effort", TF_COL_NUMBER},
    [TF_C_UNIT] = {"unit", "Unit",
                   "unit of the abundances: animals, or count units per unit effort where effort differs between "
                   "years",
                   TF_COL_TEXT},
    [TF_C_MEAN] = {"mean", "Mean", "posterior mean", TF_COL_NUMBER},
    [TF_C_SD] = {"sd", "SD", "posterior standard deviation", TF_COL_NUMBER},
    [TF_C_MEDIAN] = {"median", "Median", "posterior median", TF_COL_NUMBER},
    [TF_C_LOWER_50] = {"lower_50", "Lower 50 %", "lower end of the central 50 % interval (25 % quantile)",
                       TF_COL_NUMBER},
    [TF_C_UPPER_50] = {"upper_50", "Upper 50 %", "upper end of the central 50 % interval (75 % quantile)",
                       TF_COL_NUMBER},
    [TF_C_LOWER_95] = {"lower_95", "Lower 95 %", "lower end of the central 95 % interval (2.5 % quantile)",
                       TF_COL_NUMBER},
    [TF_C_UPPER_95] = {"upper_95", "Upper 95 %", "upper end of the central 95 % interval (97.5 % quantile)",
                       TF_COL_NUMBER},
    [TF_C_MEAN_MCSE] = {"mean_mcse", "Mean MCSE", "Monte Carlo standard error of the posterior mean", TF_COL_NUMBER},
    [TF_C_R_HAT] = {"r_hat", "R-hat", "rank-normalised split R-hat (want <= 1.01)", TF_COL_NUMBER},
    [TF_C_BULK_ESS] = {"bulk_ess", "Bulk ESS", "effective sample size for the centre (want >= 400)", TF_COL_NUMBER},
    [TF_C_TAIL_ESS] = {"tail_ess", "Tail ESS", "effective sample size for the tails (want >= 400)", TF_COL_NUMBER},
    [TF_C_MAX_R_HAT] = {"max_r_hat", "Max R-hat", "largest R-hat over the parameters (want <= 1.01)", TF_COL_NUMBER},
    [TF_C_MIN_BULK_ESS] = {"min_bulk_ess", "Min bulk ESS", "smallest bulk ESS over the parameters (want >= 400)",
                           TF_COL_NUMBER},
    [TF_C_MIN_TAIL_ESS] = {"min_tail_ess", "Min tail ESS", "smallest tail ESS over the parameters (want >= 400)",
                           TF_COL_NUMBER},
    [TF_C_MIN_ESS] = {"min_ess", "Min ESS", "smallest bulk or tail ESS over the parameters (want >= 400)",
                      TF_COL_NUMBER},
    [TF_C_PARAMETER] = {"parameter", "Parameter", "the model parameter, on its natural scale", TF_COL_TEXT},
    [TF_C_PRIOR] = {"prior", "Prior", "the prior distribution used", TF_COL_TEXT},
    [TF_C_CHAIN] = {"chain", "Chain", "chain number, from 1", TF_COL_INTEGER},
    [TF_C_DRAW] = {"draw", "Draw", "kept draw of the chain, from 1", TF_COL_INTEGER},
    [TF_C_LOG_LIKELIHOOD] = {"log_likelihood", "Log-likelihood",
                             "the particle filter's log-likelihood estimate held with the draw", TF_COL_NUMBER},
    [TF_C_LAST_ABUNDANCE] = {"last_abundance", "Last-year abundance",
                             "true abundance in the last survey year held with the draw: the start of its projections",
                             TF_COL_NUMBER},
    [TF_C_MODEL_PROB] = {"model_prob", "Model probability", "posterior probability of the model", TF_COL_PROBABILITY},
    [TF_C_P_DECLINE] = {"p_decline", "Chance of decline",
                        "posterior probability that the trend over the survey years is negative", TF_COL_PROBABILITY},
    [TF_C_CHAINS] = {"chains", "Chains", "independent PMMH chains", TF_COL_INTEGER},
    [TF_C_WARMUP] = {"warmup", "Warm-up", "discarded iterations per chain while the sampler adapted",
                     TF_COL_INTEGER},
    [TF_C_ITERATIONS] = {"iterations", "Iterations",
                         "iterations per chain after the warm-up: the chains stop once the convergence checks pass",
                         TF_COL_INTEGER},
    [TF_C_KEPT_DRAWS] = {"kept_draws", "Kept draws", "kept draws per chain", TF_COL_INTEGER},
    [TF_C_THIN] = {"thin", "Thinning",
                   "iterations per kept draw at the end; doubled whenever the kept draws filled their store",
                   TF_COL_INTEGER},
    [TF_C_CONVERGED] = {"converged", "Converged",
                        "1 when the run stopped because the convergence checks passed, 0 when it ran its fixed or "
                        "maximum length",
                        TF_COL_INTEGER},
    [TF_C_PARTICLES] = {"particles", "Particles", "particles of the filter that estimates the likelihood",
                        TF_COL_INTEGER},
    [TF_C_LOGLIK_SD] = {"loglik_sd", "Log-likelihood SD",
                        "SD of the log-likelihood estimate where the particles were tuned (above 2: poor mixing; "
                        "correlated method: of the log-ratio of two successive estimates)",
                        TF_COL_NUMBER},
    [TF_C_ACCEPTANCE] = {"acceptance", "Acceptance", "share of proposals accepted", TF_COL_PERCENT},
    [TF_C_MIN_ACCEPTANCE] = {"min_acceptance", "Lowest acceptance",
                             "lowest acceptance of any chain (below 5 %: sticky)", TF_COL_PERCENT},
    [TF_C_INVALID] = {"invalid", "Invalid",
                      "share of proposals with a zero prior or a non-finite likelihood estimate", TF_COL_PERCENT},
    [TF_C_METHOD] = {"method", "Method", "standard or correlated pseudo-marginal", TF_COL_TEXT},
    [TF_C_RHO] = {"rho", "Rho", "correlation of successive random numbers (correlated method)", TF_COL_NUMBER},
    [TF_C_SCREENED] = {"screened", "Screened",
                       "delayed acceptance: share of proposals the cheap screen rejected without a particle filter "
                       "run (blank when off)",
                       TF_COL_PERCENT},
    [TF_C_SEED] = {"seed", "Seed", "the random seed of the run", TF_COL_INTEGER},
    [TF_C_PROPOSAL] = {"proposal", "Proposal", "how the particle filter moved: guided or bootstrap", TF_COL_TEXT},
    [TF_C_PARETO_K] = {"pareto_k", "Pareto k",
                       "importance-weight diagnostic of the marginal likelihood (above 0.7: unreliable)",
                       TF_COL_NUMBER},
    [TF_C_SECONDS] = {"seconds", "Seconds", "wall-clock time the work took (blank where left out to keep files "
                                            "comparable)",
                      TF_COL_NUMBER},
    [TF_C_CHECKS] = {"checks", "Checks", "ok, or what to look at", TF_COL_TEXT},
    [TF_C_THRESHOLD] = {"threshold", "Threshold",
                        "quasi-extinction threshold: an abundance, or a fraction of the current abundance (see "
                        "threshold_kind)",
                        TF_COL_NUMBER},
    [TF_C_THRESHOLD_KIND] = {"threshold_kind", "Threshold kind",
                             "animals: an abundance; fraction_of_current: a fraction of the abundance in the last "
                             "survey year",
                             TF_COL_TEXT},
    [TF_C_PROBABILITY] = {"probability", "Probability", "probability over the simulated futures",
                          TF_COL_PROBABILITY},
    [TF_C_PROBABILITY_MCSE] = {"probability_mcse", "Probability MCSE",
                               "Monte Carlo standard error of the probability", TF_COL_NUMBER},
    [TF_C_WINDOW_YEARS] = {"window_years", "Window (years)", "length of the window the decline is measured over",
                           TF_COL_INTEGER},
    [TF_C_DECLINE] = {"decline", "Decline", "size of the decline, a fraction of the starting abundance",
                      TF_COL_PERCENT},
    [TF_C_ABUNDANCE] = {"abundance", "Abundance", "estimated abundance in the last survey year, posterior median",
                        TF_COL_NUMBER},
    [TF_C_ABUNDANCE_LOWER_95] = {"abundance_lower_95", "Abundance lower 95 %", "2.5 % quantile of that abundance",
                                 TF_COL_NUMBER},
    [TF_C_ABUNDANCE_UPPER_95] = {"abundance_upper_95", "Abundance upper 95 %", "97.5 % quantile of that abundance",
                                 TF_COL_NUMBER},
    [TF_C_CHANGE] = {"change", "Trend (whole survey)",
                     "yearly change over every survey year (least-squares slope of the log-abundance), a fraction "
                     "per year, posterior median",
                     TF_COL_PERCENT},
    [TF_C_CHANGE_LOWER_95] = {"change_lower_95", "Change lower 95 %", "2.5 % quantile of the annual change",
                              TF_COL_PERCENT},
    [TF_C_CHANGE_UPPER_95] = {"change_upper_95", "Change upper 95 %", "97.5 % quantile of the annual change",
                              TF_COL_PERCENT},
    [TF_C_RECENT_FIRST_YEAR] = {"recent_first_year", "Recent trend from", "first year of the recent trend's period",
                                TF_COL_YEAR},
    [TF_C_RECENT_CHANGE] = {"recent_change", "Recent trend",
                            "yearly change over the last years of the survey, a fraction per year, posterior median",
                            TF_COL_PERCENT},
    [TF_C_RECENT_CHANGE_LOWER_95] = {"recent_change_lower_95", "Recent trend lower 95 %",
                                     "2.5 % quantile of the recent trend", TF_COL_PERCENT},
    [TF_C_RECENT_CHANGE_UPPER_95] = {"recent_change_upper_95", "Recent trend upper 95 %",
                                     "97.5 % quantile of the recent trend", TF_COL_PERCENT},
    [TF_C_RECENT_P_DECLINE] = {"recent_p_decline", "Chance of recent decline",
                               "posterior probability that the recent trend is negative", TF_COL_PROBABILITY},
    [TF_C_BEST_GROWTH_MODEL] = {"best_growth_model", "Best growth model",
                                "growth model of highest posterior probability", TF_COL_TEXT},
    [TF_C_BEST_GROWTH_PROB] = {"best_growth_prob", "Best growth model probability",
                               "its posterior probability, summed over the counting-error models", TF_COL_PROBABILITY},
    [TF_C_BEST_MODEL] = {"best_model", "Best model", "model of highest posterior probability", TF_COL_TEXT},
    [TF_C_BEST_MODEL_PROB] = {"best_model_prob", "Best model probability", "its posterior probability",
                              TF_COL_PROBABILITY},
    [TF_C_REASON] = {"reason", "Reason", "why the population was not analysed", TF_COL_TEXT},
    [TF_C_FILE] = {"file", "File", "the CSV file, relative to this folder", TF_COL_TEXT},
    [TF_C_SHEET] = {"sheet", "Sheet", "the sheet of the workbook showing the same table (blank: CSV only)",
                    TF_COL_TEXT},
    [TF_C_ABOUT] = {"about", "About", "what the table holds", TF_COL_TEXT},
    [TF_C_ALTERNATIVE] = {"alternative", "Priors",
                          "the priors of the row: fitted (the model files used), a parameter's prior scale times 0.5 or "
                          "2 (K x2), every scale at once (all x2), or a folder of model files given with "
                          "--prior-alternative",
                          TF_COL_TEXT},
    [TF_C_LOG_ML] = {"log_ml", "Log ML", "log marginal likelihood ln p(counts | model)", TF_COL_NUMBER},
    [TF_C_LOG_ML_MCSE] = {"log_ml_mcse", "Log ML MCSE", "Monte Carlo standard error of log_ml (delta method)",
                          TF_COL_NUMBER},
    [TF_C_MODEL_PROB_MCSE] = {"model_prob_mcse", "Model probability MCSE",
                              "Monte Carlo standard error of model_prob (delta method)", TF_COL_NUMBER},
    [TF_C_DRAWS_PARETO_K] = {"draws_pareto_k", "Draws Pareto k",
                             "Pareto k of the posterior draws reweighted to the row's priors, behind its risks (above "
                             "0.7: unreliable; blank where the priors are unchanged)",
                             TF_COL_NUMBER},
    [TF_C_NOTE] = {"note", "Note", "a caution about the row", TF_COL_TEXT},
    [TF_C_SCENARIO] = {"scenario", "Scenario", "the management scenario's label (given with --scenario)",
                       TF_COL_TEXT},
    [TF_C_DIFFERENCE] = {"difference", "Difference from status quo",
                         "the scenario's probability minus the status quo's, from the same simulated futures",
                         TF_COL_PERCENT},
    [TF_C_DIFFERENCE_MCSE] = {"difference_mcse", "Difference MCSE",
                              "Monte Carlo standard error of the difference, from the paired runs: sd of the "
                              "per-run differences / sqrt(runs)",
                              TF_COL_NUMBER},
    [TF_C_SAFE_REMOVAL] = {"safe_removal", "Largest safe removal",
                           "largest constant yearly removal (animals, or a share as a fraction) that keeps the risk "
                           "of reaching the first threshold within the years asked at or below the risk asked",
                           TF_COL_NUMBER},
    [TF_C_SAFE_REMOVAL_MCSE] = {"safe_removal_mcse", "Safe removal MCSE",
                                "Monte Carlo standard error of the largest safe removal (sd over 10 batches of runs / "
                                "sqrt(10))",
                                TF_COL_NUMBER},
};

const tf_column *tf_column_of(tf_column_id id)
{
    assert((unsigned)id < N);
    return &vocabulary[id];
}

const char *tf_column_name(tf_column_id id) { return tf_column_of(id)->name; }

int tf_columns_valid_name(const char *name)
{
    if (!name || !(name[0] >= 'a' && name[0] <= 'z'))
        return 0;
    for (const char *p = name; *p; p++)
        if (!((*p >= 'a' && *p <= 'z') || (*p >= '0' && *p <= '9') || *p == '_'))
            return 0;
    return 1;
}

static tf_status add(tf_table *t, const char *name, const char *label, const char *legend, tf_col_kind kind,
                     size_t *col, tf_error *err)
{
    size_t c;
    tf_status st = tf_table_add_column(t, name, legend, kind, &c, err);
    if (st == TF_OK && label)
        st = tf_table_set_label(t, c, label, err);
    if (st == TF_OK && col)
        *col = c;
    return st;
}

tf_status tf_columns_add(tf_table *t, tf_column_id id, const char *legend, size_t *col, tf_error *err)
{
    const tf_column *c = tf_column_of(id);
    return add(t, c->name, c->label, legend ? legend : c->legend, c->kind, col, err);
}

tf_status tf_columns_add_as(tf_table *t, tf_column_id id, const char *legend, tf_col_kind kind, size_t *col,
                            tf_error *err)
{
    const tf_column *c = tf_column_of(id);
    return add(t, c->name, c->label, legend ? legend : c->legend, kind, col, err);
}

tf_status tf_columns_add_other(tf_table *t, const char *name, const char *label, const char *legend, tf_col_kind kind,
                               size_t *col, tf_error *err)
{
    if (!tf_columns_valid_name(name))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': '%s' is not a column name",
                            tf_table_name(t), name ? name : "");
    return add(t, name, label, legend, kind, col, err);
}

void tf_columns_parameter_name(const char *param, char *buf, size_t size)
{
    size_t n = 0;
    for (; param[n] && n + 1 < size; n++) {
        char c = param[n];
        buf[n] = (c >= 'A' && c <= 'Z') ? (char)(c - 'A' + 'a') : (c == '-' ? '_' : c);
    }
    if (size)
        buf[n < size ? n : size - 1] = '\0';
}
