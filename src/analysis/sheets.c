/* The report's tables for an analysis; see sheets.h. Every number here is read from the
 * analysis (fits, comparison, projection, model averages); nothing is estimated while laying
 * out. */
#include "analysis/sheets.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis/wording.h"
#include "compare/pareto.h"
#include "export/compare_table.h"
#include "export/csv_out.h"
#include "export/projection_tables.h"
#include "project/cautions.h"
#include "util/version.h"

#define TRY(call)                                                                                                      \
    do {                                                                                                               \
        if ((st = (call)) != TF_OK)                                                                                    \
            goto fail;                                                                                                 \
    } while (0)

/* Bytes of a population label kept in a sheet name, so that the longest role word
 * (" diagnostics") still fits Excel's 31 characters. */
#define LABEL_IN_NAME 19

/* ---- names ---- */

/* The population as readers see it: its label, or the survey's title when it has none. */
static const char *pop_title(const tf_sheets_provenance *prov, const tf_analysis_pop *p)
{
    const char *l = tf_series_label(tf_analysis_pop_series(p));
    return l[0] ? l : prov->title;
}

/* "Counts" for a survey of one population, "<label> counts" for several; the label is cut at
 * a character boundary. */
static void table_name(char *buf, size_t size, const tf_analysis *a, const tf_analysis_pop *p, const char *role)
{
    if (tf_analysis_n_populations(a) == 1) {
        snprintf(buf, size, "%c%s", role[0] - 'a' + 'A', role + 1);
        return;
    }
    const char *l = tf_series_label(tf_analysis_pop_series(p));
    size_t n = strlen(l);
    if (n > LABEL_IN_NAME) {
        n = LABEL_IN_NAME;
        while (n > 0 && ((unsigned char)l[n] & 0xC0) == 0x80)
            n--;
    }
    snprintf(buf, size, "%.*s %s", (int)n, l, role);
}

/* An empty table of population p for role, named by table_name; NULL when out of memory (in err). */
static tf_table *new_table(const tf_analysis *a, const tf_analysis_pop *p, const char *role, tf_error *err)
{
    char name[128];
    table_name(name, sizeof name, a, p, role);
    return tf_table_new(name, err);
}

/* "Gompertz + Poisson". */
static void model_label(const tf_analysis_model *m, char *buf, size_t size)
{
    snprintf(buf, size, "%s + %s", m->growth->label, m->obs->label);
}

/* Models in order of decreasing probability (ties keep the candidate order). */
static void model_order(const tf_analysis_pop *p, size_t *order)
{
    size_t n = tf_analysis_pop_n_models(p);
    for (size_t i = 0; i < n; i++)
        order[i] = i;
    for (size_t i = 1; i < n; i++) {
        size_t k = order[i], j = i;
        double pk = tf_analysis_pop_model(p, k)->probability;
        while (j > 0 && tf_analysis_pop_model(p, order[j - 1])->probability < pk) {
            order[j] = order[j - 1];
            j--;
        }
        order[j] = k;
    }
}

int tf_sheets_all_converged(const tf_analysis_pop *p)
{
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p, i);
        if (m->fit && !tf_fit_converged(m->fit))
            return 0;
    }
    return 1;
}

int tf_sheets_effort_varies(const tf_series *s)
{
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    double first = NAN;
    for (size_t i = 0; i < tf_series_n_years(s); i++) {
        if (isnan(y[i]))
            continue;
        if (isnan(first))
            first = e[i];
        else if (e[i] != first)
            return 1;
    }
    return 0;
}

static int whole_counts(const tf_series *s)
{
    return tf_series_first_fractional(s) == tf_series_n_years(s);
}

/* The risk windows that lie within the projection. */
static size_t n_risk_years(const tf_projection *pr)
{
    size_t n = 0;
    while (n < TF_ANALYSIS_N_RISK_YEARS && tf_analysis_risk_years[n] <= tf_projection_horizon(pr))
        n++;
    return n;
}

static tf_status add_cautions(tf_table *t, tf_error *err)
{
    for (size_t i = 0; i < tf_project_n_cautions(); i++) {
        tf_status st = tf_table_add_note(t, TF_NOTE_CAUTION, tf_project_caution(i), err);
        if (st != TF_OK)
            return st;
    }
    return TF_OK;
}

/* ---- counts and estimated abundance ---- */

static tf_status counts_sheet(const tf_analysis *a, const tf_analysis_pop *p, tf_report *r, tf_error *err)
{
    tf_status st;
    const tf_series *s = tf_analysis_pop_series(p);
    int per_effort = tf_sheets_effort_varies(s);
    const char *unit = per_effort ? "animals per unit of effort" : "animals";
    tf_table *t = new_table(a, p, "counts", err);
    if (!t)
        return tf_error_status(err);
    size_t c_year, c_count, c_effort = 0, c_rate = 0, c_med, c_q25, c_q75, c_lo, c_hi;
    char legend[160];
    TRY(tf_table_add_column(t, "Year", "calendar year", TF_COL_YEAR, &c_year, err));
    TRY(tf_table_add_column(t, "Count", "the count of the survey (blank = not surveyed)",
                            whole_counts(s) ? TF_COL_INTEGER : TF_COL_NUMBER, &c_count, err));
    if (per_effort) {
        TRY(tf_table_add_column(t, "Effort", "survey effort of the year, in the survey's units", TF_COL_NUMBER, &c_effort,
                                err));
        TRY(tf_table_add_column(t, "Count per effort", "count divided by effort", TF_COL_NUMBER, &c_rate, err));
    }
    snprintf(legend, sizeof legend, "estimated true abundance, posterior median (%s)", unit);
    TRY(tf_table_add_column(t, "Estimate", legend, TF_COL_NUMBER, &c_med, err));
    TRY(tf_table_add_column(t, "Lower 50 %", "25 % posterior quantile", TF_COL_NUMBER, &c_q25, err));
    TRY(tf_table_add_column(t, "Upper 50 %", "75 % posterior quantile", TF_COL_NUMBER, &c_q75, err));
    TRY(tf_table_add_column(t, "Lower 95 %", "2.5 % posterior quantile", TF_COL_NUMBER, &c_lo, err));
    TRY(tf_table_add_column(t, "Upper 95 %", "97.5 % posterior quantile", TF_COL_NUMBER, &c_hi, err));
    size_t n = tf_series_n_years(s);
    for (size_t i = 0; i < n; i++) {
        const tf_analysis_year *y = tf_analysis_pop_year(p, i);
        size_t row;
        TRY(tf_table_add_row(t, &row, err));
        tf_table_set_number(t, row, c_year, y->year);
        tf_table_set_number(t, row, c_count, y->count);
        if (per_effort) {
            tf_table_set_number(t, row, c_effort, isnan(y->count) ? NAN : y->effort);
            tf_table_set_number(t, row, c_rate, y->count / y->effort);
        }
        tf_table_set_number(t, row, c_med, y->median);
        tf_table_set_number(t, row, c_q25, y->q25);
        tf_table_set_number(t, row, c_q75, y->q75);
        tf_table_set_number(t, row, c_lo, y->q025);
        tf_table_set_number(t, row, c_hi, y->q975);
    }
    TRY(tf_table_add_notef(t, TF_NOTE_INFO, err,
                           "Counts and the estimated true abundance of each year, averaged over the %zu fitted models "
                           "with each model weighted by its posterior probability (see the models sheet).",
                           tf_comparison_n_fitted(tf_analysis_pop_comparison(p))));
    if (per_effort)
        TRY(tf_table_add_note(t, TF_NOTE_INFO,
                              "Effort differs between years, so the estimate is the abundance per unit of effort: the "
                              "expected count is effort times the estimate.",
                              err));
    if (tf_series_n_surveyed(s) < n)
        TRY(tf_table_add_notef(t, TF_NOTE_INFO, err,
                               "%zu of the %zu years were not surveyed; the model fills them in, with wider intervals.",
                               n - tf_series_n_surveyed(s), n));
    size_t idx;
    /* The report owns the table from here on, also when adding fails. */
    tf_table *mine = t;
    t = NULL;
    TRY(tf_report_add_table(r, mine, "counts and estimated abundance per year", &idx, err));
    tf_chart_series se[] = {
        {per_effort ? c_rate : c_count, per_effort ? "Count per effort" : "Count", TF_SERIES_POINTS},
        {c_med, "Estimate", TF_SERIES_LINE},
        {c_lo, "95 % interval", TF_SERIES_BAND},
        {c_hi, "95 % interval (upper)", TF_SERIES_BAND},
    };
    tf_report_chart ch = {.kind = TF_CHART_XY, .title = "Counts and estimated abundance", .x_title = "Year",
                          .y_title = per_effort ? "Animals per unit of effort" : "Animals", .data = idx,
                          .x_column = c_year, .series = se, .n_series = 4, .place = TF_REPORT_SAME_SHEET};
    return tf_report_add_chart(r, &ch, err);
fail:
    tf_table_free(t);
    return st;
}

/* ---- projection, risk, declines: the projection's own tables, named per population ---- */

static tf_status projection_sheets(const tf_analysis *a, const tf_analysis_pop *p, tf_report *r, tf_error *err)
{
    const tf_series *s = tf_analysis_pop_series(p);
    const tf_projection *pr = tf_analysis_pop_projection(p);
    int year0 = tf_series_first_year(s) + (int)tf_series_n_years(s) - 1;
    tf_table *t[TF_PROJECTION_N_TABLES];
    tf_status st = tf_projection_tables_build(pr, year0, t, err);
    if (st != TF_OK)
        return st;
    static const char *const roles[TF_PROJECTION_N_TABLES] = {"projection", "risk", "declines"};
    static const char *const about[TF_PROJECTION_N_TABLES] = {
        "projected abundance: median and bands", "chance of falling below each threshold, by year and threshold",
        "chance of declines of given sizes"};
    size_t idx[TF_PROJECTION_N_TABLES];
    for (size_t i = 0; i < TF_PROJECTION_N_TABLES; i++) {
        char name[128];
        table_name(name, sizeof name, a, p, roles[i]);
        st = tf_table_set_name(t[i], name, err);
        if (st == TF_OK && i == TF_PROJECTION_TABLE_BANDS)
            st = tf_table_add_note(t[i], TF_NOTE_INFO,
                                   "The futures start from the abundance of the last survey year and are shared among "
                                   "the models in proportion to their posterior probabilities.",
                                   err);
        if (st == TF_OK && tf_sheets_effort_varies(s))
            st = tf_table_add_note(t[i], TF_NOTE_INFO,
                                   "Effort differs between survey years, so abundances and thresholds in animals are "
                                   "per unit of effort.",
                                   err);
        /* The report owns the table from here on, also when adding fails. */
        tf_table *mine = t[i];
        t[i] = NULL;
        if (st != TF_OK) {
            tf_table_free(mine);
            break;
        }
        if ((st = tf_report_add_table(r, mine, about[i], &idx[i], err)) != TF_OK)
            break;
    }
    tf_projection_tables_free(t);
    if (st != TF_OK)
        return st;
    const tf_table *bands = tf_report_table(r, idx[TF_PROJECTION_TABLE_BANDS]);
    size_t c_year = tf_table_find_column(bands, "calendar_year");
    tf_chart_series se[] = {
        {tf_table_find_column(bands, "median"), "Median", TF_SERIES_LINE},
        {tf_table_find_column(bands, "pct5"), "90 % band", TF_SERIES_BAND},
        {tf_table_find_column(bands, "pct95"), "90 % band (upper)", TF_SERIES_BAND},
    };
    const char *animals = tf_sheets_effort_varies(s) ? "Animals per unit of effort" : "Animals";
    tf_report_chart ch = {.kind = TF_CHART_XY, .title = "Projected abundance", .x_title = "Year", .y_title = animals,
                          .data = idx[TF_PROJECTION_TABLE_BANDS], .x_column = c_year, .series = se, .n_series = 3,
                          .place = TF_REPORT_SAME_SHEET};
    if ((st = tf_report_add_chart(r, &ch, err)) != TF_OK)
        return st;
    /* The risk table holds one block of rows per threshold, years 0..horizon: one line each. */
    size_t n_th = tf_projection_n_thresholds(pr), h = tf_projection_horizon(pr);
    if (n_th == 0)
        return TF_OK;
    const tf_table *risk = tf_report_table(r, idx[TF_PROJECTION_TABLE_RISK]);
    size_t c_p = tf_table_find_column(risk, "probability");
    tf_chart_series rs[TF_PROJECT_MAX_THRESHOLDS];
    char names[TF_PROJECT_MAX_THRESHOLDS][64];
    for (size_t k = 0; k < n_th; k++) {
        tf_threshold th = tf_projection_threshold(pr, k);
        char label[48];
        tf_project_threshold_label(&th, label, sizeof label);
        snprintf(names[k], sizeof names[k], "Below %s", label);
        rs[k] = (tf_chart_series){c_p, names[k], TF_SERIES_LINE};
    }
    tf_report_chart rc = {.kind = TF_CHART_XY, .title = "Chance of falling below each threshold", .x_title = "Year",
                          .y_title = "Probability", .data = idx[TF_PROJECTION_TABLE_RISK],
                          .x_column = tf_table_find_column(risk, "calendar_year"), .series = rs, .n_series = n_th,
                          .first_row = 0, .n_rows = h + 1, .series_stride = h + 1, .place = TF_REPORT_SAME_SHEET};
    return tf_report_add_chart(r, &rc, err);
}

/* ---- models, parameters, diagnostics, draws ---- */

static tf_status models_sheet(const tf_analysis *a, const tf_analysis_pop *p, tf_report *r, tf_error *err)
{
    const tf_comparison *cmp = tf_analysis_pop_comparison(p);
    tf_table *t = tf_compare_table(cmp, err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    char name[128];
    table_name(name, sizeof name, a, p, "models");
    tf_status st = tf_table_set_name(t, name, err);
    if (st != TF_OK) {
        tf_table_free(t);
        return st;
    }
    size_t idx;
    if ((st = tf_report_add_table(r, t, "model comparison: marginal likelihoods and posterior model probabilities", &idx,
                                  err)) != TF_OK)
        return st;
    /* The fitted models come first in the table (tf_compare_table_order). */
    size_t n_fitted = tf_comparison_n_fitted(cmp);
    if (n_fitted == 0)
        return TF_OK;
    const tf_table *mt = tf_report_table(r, idx);
    tf_chart_series se[] = {{tf_table_find_column(mt, "post_prob"), "Posterior probability", TF_SERIES_LINE}};
    tf_report_chart ch = {.kind = TF_CHART_COLUMNS, .title = "Posterior model probabilities", .y_title = "Probability",
                          .data = idx, .x_column = tf_table_find_column(mt, "model"), .series = se, .n_series = 1,
                          .n_rows = n_fitted, .place = TF_REPORT_SAME_SHEET};
    return tf_report_add_chart(r, &ch, err);
}

/* The average annual change under each fitted model and averaged over them. */
static tf_status change_sheet(const tf_analysis *a, const tf_analysis_pop *p, const size_t *order, tf_report *r,
                              tf_error *err)
{
    tf_status st;
    tf_table *t = new_table(a, p, "change", err);
    if (!t)
        return tf_error_status(err);
    size_t c_model, c_prob, c_med, c_lo, c_hi, c_dec;
    TRY(tf_table_add_column(t, "Model", "the model's name; the last row averages the models", TF_COL_TEXT, &c_model, err));
    TRY(tf_table_add_column(t, "Probability", "posterior model probability", TF_COL_PROBABILITY, &c_prob, err));
    TRY(tf_table_add_column(t, "Annual change", "average annual change over the survey years, posterior median",
                            TF_COL_PERCENT, &c_med, err));
    TRY(tf_table_add_column(t, "Lower 95 %", "2.5 % posterior quantile of the annual change", TF_COL_PERCENT, &c_lo, err));
    TRY(tf_table_add_column(t, "Upper 95 %", "97.5 % posterior quantile of the annual change", TF_COL_PERCENT, &c_hi, err));
    TRY(tf_table_add_column(t, "P(declined)", "posterior probability that the annual change was negative",
                            TF_COL_PROBABILITY, &c_dec, err));
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p, order[i]);
        if (!m->fit)
            continue;
        const tf_fit_trend_summary *tr = tf_fit_trend(m->fit);
        size_t row;
        TRY(tf_table_add_row(t, &row, err));
        TRY(tf_table_set_text(t, row, c_model, m->name, err));
        tf_table_set_number(t, row, c_prob, m->probability);
        /* The fit reports percent per year; the table holds fractions shown as percentages. */
        tf_table_set_number(t, row, c_med, tr->median / 100);
        tf_table_set_number(t, row, c_lo, tr->q025 / 100);
        tf_table_set_number(t, row, c_hi, tr->q975 / 100);
        tf_table_set_number(t, row, c_dec, tr->p_decline);
    }
    const tf_analysis_trend *tr = tf_analysis_pop_trend(p);
    size_t row;
    TRY(tf_table_add_row(t, &row, err));
    TRY(tf_table_set_text(t, row, c_model, "average", err));
    tf_table_set_number(t, row, c_prob, 1.0);
    tf_table_set_number(t, row, c_med, tr->median);
    tf_table_set_number(t, row, c_lo, tr->q025);
    tf_table_set_number(t, row, c_hi, tr->q975);
    tf_table_set_number(t, row, c_dec, tr->p_decline);
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "Average annual change over the survey years, exp((x_last - x_first) / (years - 1)) - 1 for "
                          "each posterior draw of the true log abundance x, under each model and averaged over the "
                          "models (each draw weighted by its model's probability).",
                          err));
    return tf_report_add_table(r, t, "average annual change per model and averaged", NULL, err);
fail:
    tf_table_free(t);
    return st;
}

static tf_status parameters_sheet(const tf_analysis *a, const tf_analysis_pop *p, const size_t *order, tf_report *r,
                                  tf_error *err)
{
    tf_status st;
    tf_table *t = new_table(a, p, "parameters", err);
    if (!t)
        return tf_error_status(err);
    size_t c_model, c_par, c_mean, c_sd, c_lo, c_med, c_hi, c_rhat, c_bulk, c_tail, c_mcse;
    char legend[160];
    TRY(tf_table_add_column(t, "Model", "the model's name", TF_COL_TEXT, &c_model, err));
    TRY(tf_table_add_column(t, "Parameter", "r: growth rate, K: carrying capacity, theta: shape, sigma: process noise sd, "
                                            "tau / phi: counting error",
                            TF_COL_TEXT, &c_par, err));
    TRY(tf_table_add_column(t, "Mean", "posterior mean", TF_COL_NUMBER, &c_mean, err));
    TRY(tf_table_add_column(t, "SD", "posterior standard deviation", TF_COL_NUMBER, &c_sd, err));
    TRY(tf_table_add_column(t, "2.5 %", "2.5 % posterior quantile", TF_COL_NUMBER, &c_lo, err));
    TRY(tf_table_add_column(t, "Median", "posterior median", TF_COL_NUMBER, &c_med, err));
    TRY(tf_table_add_column(t, "97.5 %", "97.5 % posterior quantile", TF_COL_NUMBER, &c_hi, err));
    snprintf(legend, sizeof legend, "rank-normalised split R-hat (above %.2f: chains disagree)", TF_FIT_RHAT_MAX);
    TRY(tf_table_add_column(t, "R-hat", legend, TF_COL_NUMBER, &c_rhat, err));
    snprintf(legend, sizeof legend, "effective sample size for the centre (below %.0f: too few)", TF_FIT_ESS_MIN);
    TRY(tf_table_add_column(t, "Bulk ESS", legend, TF_COL_NUMBER, &c_bulk, err));
    snprintf(legend, sizeof legend, "effective sample size for the tails (below %.0f: too few)", TF_FIT_ESS_MIN);
    TRY(tf_table_add_column(t, "Tail ESS", legend, TF_COL_NUMBER, &c_tail, err));
    TRY(tf_table_add_column(t, "MCSE of mean", "Monte Carlo standard error of the posterior mean", TF_COL_NUMBER, &c_mcse,
                            err));
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p, order[i]);
        if (!m->fit)
            continue;
        for (size_t j = 0; j < tf_fit_n_params(m->fit); j++) {
            const tf_fit_param_summary *ps = tf_fit_param(m->fit, j);
            size_t row;
            TRY(tf_table_add_row(t, &row, err));
            TRY(tf_table_set_text(t, row, c_model, m->name, err));
            TRY(tf_table_set_text(t, row, c_par, tf_fit_param_name(m->fit, j), err));
            double v[] = {ps->mean, ps->sd, ps->q025, ps->q50, ps->q975, ps->rhat, ps->ess_bulk, ps->ess_tail, ps->mcse_mean};
            size_t c[] = {c_mean, c_sd, c_lo, c_med, c_hi, c_rhat, c_bulk, c_tail, c_mcse};
            for (size_t k = 0; k < sizeof v / sizeof v[0]; k++)
                tf_table_set_number(t, row, c[k], v[k]);
            if (!(ps->rhat <= TF_FIT_RHAT_MAX))
                TRY(tf_table_set_warning(t, row, c_rhat, err));
            if (!(ps->ess_bulk >= TF_FIT_ESS_MIN))
                TRY(tf_table_set_warning(t, row, c_bulk, err));
            if (!(ps->ess_tail >= TF_FIT_ESS_MIN))
                TRY(tf_table_set_warning(t, row, c_tail, err));
        }
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "Posterior summaries of each model's parameters on their natural scale; flagged cells fail "
                          "the convergence checks of Vehtari et al. (2021).",
                          err));
    return tf_report_add_table(r, t, "parameter summaries per model", NULL, err);
fail:
    tf_table_free(t);
    return st;
}

static tf_status diagnostics_sheet(const tf_analysis *a, const tf_analysis_pop *p, const size_t *order, int seconds,
                                   tf_report *r, tf_error *err)
{
    tf_status st;
    char legend[160];
    tf_table *t = new_table(a, p, "diagnostics", err);
    if (!t)
        return tf_error_status(err);
    size_t c_model, c_chains, c_run, c_iter, c_thin, c_warm, c_part, c_llsd, c_acc, c_accmin, c_inv, c_rhat, c_bulk, c_tail, c_k,
        c_sec = 0, c_status;
    TRY(tf_table_add_column(t, "Model", "the model's name", TF_COL_TEXT, &c_model, err));
    TRY(tf_table_add_column(t, "Chains", "independent PMMH chains", TF_COL_INTEGER, &c_chains, err));
    TRY(tf_table_add_column(t, "Iterations", "iterations of each chain after the warm-up: the chains stop once "
                            "the convergence checks pass", TF_COL_INTEGER, &c_run, err));
    TRY(tf_table_add_column(t, "Draws per chain", "kept draws of each chain", TF_COL_INTEGER, &c_iter, err));
    TRY(tf_table_add_column(t, "Thinning", "iterations per kept draw; doubled each time the kept draws filled "
                            "their store, so that memory stays bounded in long runs", TF_COL_INTEGER, &c_thin, err));
    TRY(tf_table_add_column(t, "Warm-up", "discarded draws of each chain while the sampler adapted", TF_COL_INTEGER, &c_warm,
                            err));
    TRY(tf_table_add_column(t, "Particles", "particles of the filter that estimates the likelihood", TF_COL_INTEGER, &c_part,
                            err));
    snprintf(legend, sizeof legend, "SD of the log-likelihood estimate where it was tuned (above %.0f: poor mixing)",
             TF_SHEETS_LOGLIK_SD_MAX);
    TRY(tf_table_add_column(t, "Log-lik SD", legend, TF_COL_NUMBER, &c_llsd, err));
    TRY(tf_table_add_column(t, "Acceptance", "share of proposals accepted, mean over chains", TF_COL_PERCENT, &c_acc, err));
    snprintf(legend, sizeof legend, "lowest acceptance of any chain (below %.0f %%: sticky)", 100 * TF_SHEETS_ACCEPT_MIN);
    TRY(tf_table_add_column(t, "Lowest acceptance", legend, TF_COL_PERCENT, &c_accmin, err));
    TRY(tf_table_add_column(t, "Invalid", "share of proposals whose likelihood estimate was not finite", TF_COL_PERCENT,
                            &c_inv, err));
    TRY(tf_table_add_column(t, "Max R-hat", "largest R-hat over the parameters", TF_COL_NUMBER, &c_rhat, err));
    TRY(tf_table_add_column(t, "Min bulk ESS", "smallest bulk ESS over the parameters", TF_COL_NUMBER, &c_bulk, err));
    TRY(tf_table_add_column(t, "Min tail ESS", "smallest tail ESS over the parameters", TF_COL_NUMBER, &c_tail, err));
    snprintf(legend, sizeof legend, "importance-weight diagnostic of the marginal likelihood (above %.1f: unreliable)",
             TF_PARETO_K_MAX);
    TRY(tf_table_add_column(t, "Pareto k", legend, TF_COL_NUMBER, &c_k, err));
    if (seconds)
        TRY(tf_table_add_column(t, "Seconds", "time the sampler took", TF_COL_NUMBER, &c_sec, err));
    TRY(tf_table_add_column(t, "Status", "ok, or what to look at", TF_COL_TEXT, &c_status, err));
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p, order[i]);
        if (m->state == TF_CANDIDATE_EXCLUDED)
            continue;
        size_t row;
        TRY(tf_table_add_row(t, &row, err));
        TRY(tf_table_set_text(t, row, c_model, m->name, err));
        if (!m->fit) {
            TRY(tf_table_set_text(t, row, c_status, m->note[0] ? m->note : "the fit failed", err));
            TRY(tf_table_set_warning(t, row, TF_TABLE_WHOLE_ROW, err));
            continue;
        }
        double k_main = m->evidence->main.pareto_k;
        tf_table_set_number(t, row, c_k, k_main);
        const tf_fit *f = m->fit;
        const tf_fit_settings *fs = tf_fit_settings_of(f);
        /* One health summary with one NaN rule (sampler/fit.h): an undiagnosable parameter
         * leaves the cell empty and flagged. */
        tf_fit_health_summary h = tf_fit_health(f);
        double rhat = h.max_rhat, bulk = h.min_bulk_ess, tail = h.min_tail_ess;
        size_t nc = tf_fit_n_chains(f);
        double v[] = {(double)nc, (double)fs->n_iterations, (double)tf_fit_n_iter(f), (double)fs->thin, (double)fs->n_warmup, (double)fs->n_particles,
                      fs->loglik_sd, h.mean_acceptance, h.min_acceptance, h.mean_invalid, rhat, bulk, tail};
        size_t c[] = {c_chains, c_run, c_iter, c_thin, c_warm, c_part, c_llsd, c_acc, c_accmin, c_inv, c_rhat, c_bulk, c_tail};
        for (size_t k = 0; k < sizeof v / sizeof v[0]; k++)
            tf_table_set_number(t, row, c[k], v[k]);
        if (seconds)
            tf_table_set_number(t, row, c_sec, fs->seconds);
        char status[256] = "";
        size_t used = 0;
#define FLAG(cond, col, text)                                                                                          \
    do {                                                                                                               \
        if (cond) {                                                                                                    \
            TRY(tf_table_set_warning(t, row, col, err));                                                               \
            int w_ = snprintf(status + used, sizeof status - used, "%s%s", used ? "; " : "", text);                    \
            if (w_ > 0)                                                                                                \
                used += (size_t)w_ < sizeof status - used ? (size_t)w_ : sizeof status - 1 - used;                     \
        }                                                                                                              \
    } while (0)
        FLAG(h.n_undiagnosed > 0, isnan(rhat) ? c_rhat : isnan(bulk) ? c_bulk : c_tail, "R-hat or ESS undefined: chains too sticky or too short to diagnose");
        FLAG(rhat > TF_FIT_RHAT_MAX, c_rhat, "R-hat high: run longer chains");
        FLAG(bulk < TF_FIT_ESS_MIN, c_bulk, "few effective draws");
        FLAG(tail < TF_FIT_ESS_MIN, c_tail, "few effective draws in the tails");
        /* An undefined ESS is flagged too; the status has said why once above. */
        if (isnan(bulk))
            TRY(tf_table_set_warning(t, row, c_bulk, err));
        if (isnan(tail))
            TRY(tf_table_set_warning(t, row, c_tail, err));
        FLAG(h.min_acceptance < TF_SHEETS_ACCEPT_MIN, c_accmin, "a chain rarely moves");
        FLAG(fs->loglik_sd > TF_SHEETS_LOGLIK_SD_MAX, c_llsd, "noisy likelihood: use more particles");
        FLAG(!(k_main <= TF_PARETO_K_MAX), c_k, "log ML unreliable");
#undef FLAG
        TRY(tf_table_set_text(t, row, c_status, used ? status : "ok", err));
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO,
                          "How well the sampler did for each model. Flagged cells deserve a look before the numbers of "
                          "that model are trusted.",
                          err));
    return tf_report_add_table(r, t, "sampler diagnostics per model", NULL, err);
fail:
    tf_table_free(t);
    return st;
}

static tf_status draws_sheet(const tf_analysis *a, const tf_analysis_pop *p, const size_t *order, int in_workbook,
                             tf_report *r, tf_error *err)
{
    tf_status st;
    tf_table *t = new_table(a, p, "draws", err);
    if (!t)
        return tf_error_status(err);
    /* One column per parameter name, in order of first appearance over the models. */
    const char *names[TF_ANALYSIS_MAX_NAMES * TF_MAX_PARAMS];
    size_t cols[TF_ANALYSIS_MAX_NAMES * TF_MAX_PARAMS], n_names = 0;
    size_t c_model, c_chain, c_iter, c_ll, c_last;
    TRY(tf_table_add_column(t, "Model", "the model's name", TF_COL_TEXT, &c_model, err));
    TRY(tf_table_add_column(t, "Chain", "chain number, from 1", TF_COL_INTEGER, &c_chain, err));
    TRY(tf_table_add_column(t, "Draw", "kept draw of the chain, from 1", TF_COL_INTEGER, &c_iter, err));
    TRY(tf_table_add_column(t, "Log-likelihood", "the particle filter's estimate held with the draw", TF_COL_NUMBER, &c_ll,
                            err));
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p, order[i]);
        if (!m->fit)
            continue;
        for (size_t j = 0; j < tf_fit_n_params(m->fit); j++) {
            const char *nm = tf_fit_param_name(m->fit, j);
            size_t k = 0;
            while (k < n_names && strcmp(names[k], nm))
                k++;
            if (k == n_names && n_names < sizeof names / sizeof names[0]) {
                char legend[96];
                snprintf(legend, sizeof legend, "parameter %s (blank: not a parameter of the model)", nm);
                names[n_names] = nm;
                TRY(tf_table_add_column(t, nm, legend, TF_COL_NUMBER, &cols[n_names], err));
                n_names++;
            }
        }
    }
    TRY(tf_table_add_column(t, "Last-year abundance", "true abundance in the last survey year held with the draw: the start "
                                                      "of its projections",
                            TF_COL_NUMBER, &c_last, err));
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p, order[i]);
        if (!m->fit)
            continue;
        const tf_fit *f = m->fit;
        size_t np = tf_fit_n_params(f), ny = tf_fit_n_years(f);
        size_t map[TF_MAX_PARAMS];
        for (size_t j = 0; j < np; j++) {
            size_t k = 0;
            while (k < n_names && strcmp(names[k], tf_fit_param_name(f, j)))
                k++;
            map[j] = k;
        }
        for (size_t c = 0; c < tf_fit_n_chains(f); c++)
            for (size_t it = 0; it < tf_fit_n_iter(f); it++) {
                size_t row;
                TRY(tf_table_add_row(t, &row, err));
                TRY(tf_table_set_text(t, row, c_model, m->name, err));
                tf_table_set_number(t, row, c_chain, (double)(c + 1));
                tf_table_set_number(t, row, c_iter, (double)(it + 1));
                tf_table_set_number(t, row, c_ll, tf_fit_loglik(f, c, it));
                const double *th = tf_fit_draw(f, c, it);
                for (size_t j = 0; j < np; j++)
                    if (map[j] < n_names)
                        tf_table_set_number(t, row, cols[map[j]], th[j]);
                tf_table_set_number(t, row, c_last, exp(tf_fit_path(f, c, it)[ny - 1]));
            }
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO, "Every kept posterior draw of every model, chain by chain.", err));
    int too_long = tf_table_n_rows(t) > TF_REPORT_SHEET_ROWS;
    size_t idx;
    tf_table *mine = t;
    t = NULL;
    TRY(tf_report_add_table(r, mine,
                            too_long       ? "raw posterior draws of every model (CSV only: too many rows for a sheet)"
                            : in_workbook ? "raw posterior draws of every model"
                                          : "raw posterior draws of every model (CSV only; --workbook-draws puts "
                                            "them in the workbook)",
                            &idx, err));
    if (too_long || !in_workbook)
        tf_report_set_csv_only(r, idx);
    return TF_OK;
fail:
    tf_table_free(t);
    return st;
}

/* ---- the first page and the overview ---- */

void tf_sheets_sentences(const tf_analysis *a, size_t population, char *buf, size_t size)
{
    const tf_analysis_pop *p = tf_analysis_population(a, population);
    const tf_series *s = tf_analysis_pop_series(p);
    int y0 = tf_series_first_year(s), y1 = y0 + (int)tf_series_n_years(s) - 1;
    char trend[512] = "", risk[512] = "";
    tf_wording_trend(tf_analysis_pop_trend(p), y0, y1, trend, sizeof trend);
    const tf_projection *pr = tf_analysis_pop_projection(p);
    if (tf_projection_n_thresholds(pr) > 0) {
        /* The middle window when the horizon reaches it (20 years), else the horizon. */
        size_t years = tf_projection_horizon(pr) >= tf_analysis_risk_years[1] ? tf_analysis_risk_years[1]
                                                                              : tf_projection_horizon(pr);
        tf_threshold th = tf_projection_threshold(pr, 0);
        tf_wording_risk(&th, years, tf_projection_risk(pr, 0, years), risk, sizeof risk);
    }
    snprintf(buf, size, "%s%s%s", trend, risk[0] ? " " : "", risk);
}

/* Where the population's raw draws are: the first page says it, since by default they are not in
 * the workbook. The file name is the one the report gives the draws table (its name made a file
 * name, export/csv_out.h). */
static tf_status draws_item(const tf_analysis *a, const tf_analysis_pop *p, const tf_sheets_provenance *prov,
                            tf_table *t, tf_error *err)
{
    char name[128], file[96], text[512];
    table_name(name, sizeof name, a, p, "draws");
    tf_csv_file_name(name, file, sizeof file);
    size_t n_rows = 0;
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++)
        if (tf_analysis_pop_model(p, i)->fit)
            n_rows += tf_fit_n_draws(tf_analysis_pop_model(p, i)->fit);
    const char *place = prov->csv_place ? prov->csv_place : "the CSV files written with this workbook";
    if (prov->workbook_draws && n_rows <= TF_REPORT_SHEET_ROWS)
        snprintf(text, sizeof text, "on the sheet '%s', and as %s in %s", name, file, place);
    else
        snprintf(text, sizeof text, "CSV only: %s in %s", file, place);
    return tf_table_add_item_text(t, "Raw posterior draws", text,
                                  prov->workbook_draws ? "every kept draw of every model"
                                                       : "every kept draw of every model; kept out of the workbook to "
                                                         "keep it light (--workbook-draws puts them in)",
                                  err);
}

static tf_status population_items(const tf_analysis *a, size_t pi, const tf_sheets_provenance *prov, tf_table *t,
                                  tf_error *err)
{
    tf_status st;
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    const tf_series *s = tf_analysis_pop_series(p);
    const tf_projection *pr = tf_analysis_pop_projection(p);
    size_t n = tf_series_n_years(s);
    int y0 = tf_series_first_year(s), y1 = y0 + (int)n - 1;
    char text[1024], note[256];
    const char *unit = tf_sheets_effort_varies(s) ? "animals per unit of effort" : "animals";

    snprintf(text, sizeof text, "Population: %s", pop_title(prov, p));
    TRY(tf_table_add_heading(t, text, err));
    tf_sheets_sentences(a, pi, text, sizeof text);
    TRY(tf_table_add_item_text(t, "In brief", text, NULL, err));
    snprintf(text, sizeof text, "%d-%d", y0, y1);
    snprintf(note, sizeof note, "%zu years, %zu of them surveyed", n, tf_series_n_surveyed(s));
    TRY(tf_table_add_item_text(t, "Survey years", text, note, err));

    const tf_analysis_year *last = tf_analysis_pop_year(p, n - 1);
    snprintf(text, sizeof text, "Abundance in %d", y1);
    snprintf(note, sizeof note, "posterior median, %s, averaged over the models", unit);
    TRY(tf_table_add_item_number(t, text, last->median, TF_COL_NUMBER, note, err));
    TRY(tf_table_add_item_number(t, "  lower 95 %", last->q025, TF_COL_NUMBER, "2.5 % posterior quantile", err));
    TRY(tf_table_add_item_number(t, "  upper 95 %", last->q975, TF_COL_NUMBER, "97.5 % posterior quantile", err));

    const tf_analysis_trend *tr = tf_analysis_pop_trend(p);
    TRY(tf_table_add_item_number(t, "Average annual change", tr->median, TF_COL_PERCENT,
                                 "per year over the survey years, posterior median", err));
    TRY(tf_table_add_item_number(t, "  lower 95 %", tr->q025, TF_COL_PERCENT, NULL, err));
    TRY(tf_table_add_item_number(t, "  upper 95 %", tr->q975, TF_COL_PERCENT, NULL, err));
    TRY(tf_table_add_item_number(t, "Chance the population declined", tr->p_decline, TF_COL_PROBABILITY,
                                 "posterior probability that the annual change was negative", err));

    size_t g = tf_analysis_pop_best_growth(p);
    TRY(tf_table_add_item_text(t, "Best-supported growth model", tf_analysis_pop_growth(p, g)->label, NULL, err));
    TRY(tf_table_add_item_number(t, "  its probability", tf_analysis_pop_growth_probability(p, g), TF_COL_PROBABILITY,
                                 "summed over the counting-error models it was paired with", err));
    const tf_analysis_model *best = tf_analysis_pop_model(p, tf_analysis_pop_best(p));
    model_label(best, text, sizeof text);
    TRY(tf_table_add_item_text(t, "Best-supported model", text, NULL, err));
    TRY(tf_table_add_item_number(t, "  its probability", best->probability, TF_COL_PROBABILITY, NULL, err));

    size_t nry = n_risk_years(pr);
    for (size_t k = 0; k < tf_projection_n_thresholds(pr); k++) {
        tf_threshold th = tf_projection_threshold(pr, k);
        char words[96];
        tf_wording_threshold(&th, words, sizeof words);
        for (size_t y = 0; y < nry; y++) {
            size_t yr = tf_analysis_risk_years[y];
            snprintf(text, sizeof text, "Chance of falling below %s within %zu years", words, yr);
            snprintf(note, sizeof note, "by %d; Monte Carlo s.e. %.3f", y1 + (int)yr, tf_projection_risk_se(pr, k, yr));
            TRY(tf_table_add_item_number(t, text, tf_projection_risk(pr, k, yr), TF_COL_PROBABILITY, note, err));
        }
    }
    for (size_t w = 0; w < tf_projection_n_windows(pr); w++)
        for (size_t d = 0; d < tf_projection_n_declines(pr); d++) {
            char pct[32];
            snprintf(text, sizeof text, "Chance of a decline of %s %% or more within %zu years",
                     tf_wording_percent(100 * tf_projection_decline(pr, d), pct, sizeof pct), tf_projection_window(pr, w));
            snprintf(note, sizeof note, "Monte Carlo s.e. %.3f", tf_projection_decline_se(pr, w, d));
            TRY(tf_table_add_item_number(t, text, tf_projection_decline_prob(pr, w, d), TF_COL_PROBABILITY, note, err));
        }
    int conv = tf_sheets_all_converged(p);
    TRY(tf_table_add_item_text(t, "Sampler checks", conv ? "passed" : "not all passed",
                               conv ? "every fit passed the R-hat and ESS checks"
                                    : "some fits failed the R-hat or ESS checks: see the diagnostics sheet",
                               err));
    if (!conv)
        TRY(tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err));
    TRY(draws_item(a, p, prov, t, err));
    return TF_OK;
fail:
    return st;
}

/* "a, b and c" of the names into buf. */
static void list_names(const char *const *names, size_t n, char *buf, size_t size)
{
    size_t used = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < n && used < size; i++) {
        int w = snprintf(buf + used, size - used, "%s%s", i == 0 ? "" : i + 1 == n ? " and " : ", ", names[i]);
        if (w < 0)
            break;
        used += (size_t)w;
    }
}

static tf_status provenance_items(const tf_analysis *a, const tf_sheets_provenance *prov, tf_table *t, tf_error *err)
{
    tf_status st;
    const tf_analysis_options *o = tf_analysis_options_of(a);
    char text[1024];
    TRY(tf_table_add_heading(t, "How this was made", err));
    TRY(tf_table_add_item_text(t, "Survey file", prov->input_name, NULL, err));
    TRY(tf_table_add_item_text(t, "SHA-256 of the file", prov->sha256, "identifies the exact file that was read", err));
    TRY(tf_table_add_item_text(t, "Program", "tallyfit " TF_VERSION, NULL, err));
    TRY(tf_table_add_item_text(t, "Run on", prov->date, NULL, err));
    if (o->estimates)
        TRY(tf_table_add_item_text(t, "Counts", "read as estimates (--estimates), not whole counts",
                                   "so only counting-error models of continuous amounts (log-normal) were fitted",
                                   err));
    static const char seed_note[] = "the same seed and settings give the same numbers, whatever the number of threads";
    /* A number when a double holds it exactly (below 2^53), else its digits as text. */
    if (o->seed <= (UINT64_C(1) << 53)) {
        TRY(tf_table_add_item_number(t, "Random seed", (double)o->seed, TF_COL_INTEGER, seed_note, err));
    } else {
        snprintf(text, sizeof text, "%llu", (unsigned long long)o->seed);
        TRY(tf_table_add_item_text(t, "Random seed", text, seed_note, err));
    }
    const tf_analysis_pop *p0 = tf_analysis_population(a, 0);
    const char *names[TF_ANALYSIS_MAX_MODELS];
    size_t n = tf_analysis_pop_n_models(p0);
    for (size_t i = 0; i < n && i < sizeof names / sizeof names[0]; i++)
        names[i] = tf_analysis_pop_model(p0, i)->name;
    list_names(names, n, text, sizeof text);
    TRY(tf_table_add_item_text(t, "Candidate models", text,
                               tf_analysis_n_populations(a) > 1 ? "of the first population; see each models sheet" : NULL,
                               err));
    char particles[64];
    if (o->fit.n_particles)
        snprintf(particles, sizeof particles, "%zu particles", o->fit.n_particles);
    else
        snprintf(particles, sizeof particles, "particles chosen per model");
    if (o->fit.min_iter == o->fit.max_iter)
        snprintf(text, sizeof text,
                 "PMMH, %zu chains of %zu iterations after %zu warm-up iterations, at most %zu draws kept per chain; %s, %s proposal",
                 o->fit.n_chains, o->fit.max_iter, o->fit.n_warmup, o->fit.max_kept, particles, tf_filter_proposal_name(o->fit.proposal));
    else
        snprintf(text, sizeof text,
                 "PMMH, %zu chains after %zu warm-up iterations, run until R-hat <= %.2f and bulk and tail ESS >= %.0f "
                 "(%zu to %zu iterations), at most %zu draws kept per chain; %s, %s proposal",
                 o->fit.n_chains, o->fit.n_warmup, TF_FIT_RHAT_MAX, o->fit.min_ess, o->fit.min_iter, o->fit.max_iter,
                 o->fit.max_kept, particles, tf_filter_proposal_name(o->fit.proposal));
    TRY(tf_table_add_item_text(t, "Sampler", text, "see each diagnostics sheet", err));
    const tf_projection *pr = tf_analysis_pop_projection(p0);
    snprintf(text, sizeof text, "%zu simulated futures over %zu years, models weighted by their posterior probabilities",
             tf_projection_n_runs(pr), tf_projection_horizon(pr));
    TRY(tf_table_add_item_text(t, "Projection", text, NULL, err));
    if (o->evidence.target_se > 0)
        snprintf(text, sizeof text,
                 "importance sampling squared, draws per importance density until the standard error of log p(y) "
                 "is at most %.2f (at most %zu)", o->evidence.target_se, o->evidence.n_draws);
    else
        snprintf(text, sizeof text, "importance sampling squared, %zu draws per importance density", o->evidence.n_draws);
    TRY(tf_table_add_item_text(t, "Marginal likelihoods", text, "see each models sheet", err));
    return TF_OK;
fail:
    return st;
}

/* Counts far from their neighbours (series.h), one caution each: they are fitted as they are,
 * and a typing error among them would move every figure. */
static tf_status outlier_items(const tf_analysis *a, tf_table *t, tf_error *err)
{
    tf_status st;
    for (size_t i = 0; i < tf_analysis_n_populations(a); i++) {
        const tf_series *s = tf_analysis_pop_series(tf_analysis_population(a, i));
        tf_series_outlier o[16];
        size_t n = tf_series_outliers(s, o, 16);
        for (size_t k = 0; k < n && k < 16; k++) {
            char text[400], note[64];
            tf_series_outlier_text(s, &o[k], text, sizeof text);
            snprintf(note, sizeof note, "line %ld of the survey file", tf_series_source_line(s, o[k].index));
            TRY(tf_table_add_item_text(t, "Count to check", text, note, err));
        }
        if (n > 16) {
            char text[128];
            snprintf(text, sizeof text, "%zu more counts far from their neighbours (run tallyfit check)", n - 16);
            TRY(tf_table_add_item_text(t, "Count to check", text, NULL, err));
        }
    }
    return TF_OK;
fail:
    return st;
}

static tf_status summary_sheet(const tf_analysis *a, const tf_sheets_provenance *prov, tf_report *r, tf_error *err)
{
    tf_status st;
    tf_table *t = tf_table_new_summary("Summary", err);
    if (!t)
        return tf_error_status(err);
    TRY(tf_table_add_notef(t, TF_NOTE_INFO, err, "Population trend and risk from the survey %s (%s).", prov->title,
                           prov->input_name));
    TRY(add_cautions(t, err));
    for (size_t i = 0; i < tf_analysis_n_populations(a); i++)
        TRY(population_items(a, i, prov, t, err));
    TRY(tf_table_add_heading(t, "Cautions", err));
    for (size_t i = 0; i < tf_project_n_cautions(); i++) {
        char label[32];
        snprintf(label, sizeof label, "Caution %zu", i + 1);
        TRY(tf_table_add_item_text(t, label, tf_project_caution(i), NULL, err));
    }
    TRY(outlier_items(a, t, err));
    for (size_t i = 0; prov->left_out_from && i < tf_survey_n_rejected(prov->left_out_from); i++) {
        const tf_survey_rejected *x = tf_survey_rejected_at(prov->left_out_from, i);
        char text[700], note[64];
        snprintf(text, sizeof text, "'%.100s', not analysed: %s", x->label, x->what);
        snprintf(note, sizeof note, "line %ld of the survey file", x->line);
        TRY(tf_table_add_item_text(t, "Population left out", text, note, err));
    }
    TRY(provenance_items(a, prov, t, err));
    return tf_report_add_table(r, t, "the first page: findings, cautions and provenance", NULL, err);
fail:
    tf_table_free(t);
    return st;
}

/* One row per population with the first page's figures as numbers. */
static tf_status overview_sheet(const tf_analysis *a, const tf_sheets_provenance *prov, tf_report *r, tf_error *err)
{
    tf_status st;
    tf_table *t = tf_table_new("All populations", err);
    if (!t)
        return tf_error_status(err);
    /* Thresholds and declines are those of the options, so every population has the same columns. */
    const tf_projection *pr0 = tf_analysis_pop_projection(tf_analysis_population(a, 0));
    size_t n_th = tf_projection_n_thresholds(pr0), nry = n_risk_years(pr0);
    size_t n_win = tf_projection_n_windows(pr0), n_dec = tf_projection_n_declines(pr0);
    TRY(tf_table_add_column(t, "Population", "the population's label", TF_COL_TEXT, NULL, err));
    TRY(tf_table_add_column(t, "First year", "first year of the survey", TF_COL_YEAR, NULL, err));
    TRY(tf_table_add_column(t, "Last year", "last year of the survey", TF_COL_YEAR, NULL, err));
    TRY(tf_table_add_column(t, "Abundance", "estimated abundance in the last year, posterior median", TF_COL_NUMBER, NULL,
                            err));
    TRY(tf_table_add_column(t, "Lower 95 %", "2.5 % posterior quantile of that abundance", TF_COL_NUMBER, NULL, err));
    TRY(tf_table_add_column(t, "Upper 95 %", "97.5 % posterior quantile of that abundance", TF_COL_NUMBER, NULL, err));
    TRY(tf_table_add_column(t, "Annual change", "average annual change over the survey years, posterior median",
                            TF_COL_PERCENT, NULL, err));
    TRY(tf_table_add_column(t, "Change lower 95 %", "2.5 % posterior quantile of the annual change", TF_COL_PERCENT, NULL,
                            err));
    TRY(tf_table_add_column(t, "Change upper 95 %", "97.5 % posterior quantile of the annual change", TF_COL_PERCENT, NULL,
                            err));
    TRY(tf_table_add_column(t, "P(declined)", "posterior probability that the annual change was negative",
                            TF_COL_PROBABILITY, NULL, err));
    TRY(tf_table_add_column(t, "Best growth model", "growth model of highest posterior probability", TF_COL_TEXT, NULL, err));
    TRY(tf_table_add_column(t, "Its probability", "its posterior probability, over the counting-error models",
                            TF_COL_PROBABILITY, NULL, err));
    for (size_t k = 0; k < n_th; k++) {
        tf_threshold th = tf_projection_threshold(pr0, k);
        char label[64], words[96], header[96], legend[256];
        tf_project_threshold_label(&th, label, sizeof label);
        tf_wording_threshold(&th, words, sizeof words);
        for (size_t y = 0; y < nry; y++) {
            snprintf(header, sizeof header, "Below %s in %zu y", label, tf_analysis_risk_years[y]);
            snprintf(legend, sizeof legend, "chance of falling below %s within %zu years", words, tf_analysis_risk_years[y]);
            TRY(tf_table_add_column(t, header, legend, TF_COL_PROBABILITY, NULL, err));
        }
    }
    for (size_t w = 0; w < n_win; w++)
        for (size_t d = 0; d < n_dec; d++) {
            char pct[32], header[96], legend[256];
            tf_wording_percent(100 * tf_projection_decline(pr0, d), pct, sizeof pct);
            snprintf(header, sizeof header, "Decline %s %% in %zu y", pct, tf_projection_window(pr0, w));
            snprintf(legend, sizeof legend, "chance of a decline of %s %% or more within %zu years", pct,
                     tf_projection_window(pr0, w));
            TRY(tf_table_add_column(t, header, legend, TF_COL_PROBABILITY, NULL, err));
        }
    size_t c_conv;
    TRY(tf_table_add_column(t, "Sampler checks", "passed: every fit passed the R-hat and ESS checks", TF_COL_TEXT, &c_conv,
                            err));
    for (size_t i = 0; i < tf_analysis_n_populations(a); i++) {
        const tf_analysis_pop *p = tf_analysis_population(a, i);
        const tf_series *s = tf_analysis_pop_series(p);
        const tf_projection *pr = tf_analysis_pop_projection(p);
        size_t n = tf_series_n_years(s);
        const tf_analysis_year *last = tf_analysis_pop_year(p, n - 1);
        const tf_analysis_trend *tr = tf_analysis_pop_trend(p);
        size_t g = tf_analysis_pop_best_growth(p), row, c = 0;
        TRY(tf_table_add_row(t, &row, err));
        TRY(tf_table_set_text(t, row, c++, pop_title(prov, p), err));
        tf_table_set_number(t, row, c++, tf_series_first_year(s));
        tf_table_set_number(t, row, c++, tf_series_first_year(s) + (double)n - 1);
        tf_table_set_number(t, row, c++, last->median);
        tf_table_set_number(t, row, c++, last->q025);
        tf_table_set_number(t, row, c++, last->q975);
        tf_table_set_number(t, row, c++, tr->median);
        tf_table_set_number(t, row, c++, tr->q025);
        tf_table_set_number(t, row, c++, tr->q975);
        tf_table_set_number(t, row, c++, tr->p_decline);
        TRY(tf_table_set_text(t, row, c++, tf_analysis_pop_growth(p, g)->label, err));
        tf_table_set_number(t, row, c++, tf_analysis_pop_growth_probability(p, g));
        for (size_t k = 0; k < n_th; k++)
            for (size_t y = 0; y < nry; y++)
                tf_table_set_number(t, row, c++, tf_projection_risk(pr, k, tf_analysis_risk_years[y]));
        for (size_t w = 0; w < n_win; w++)
            for (size_t d = 0; d < n_dec; d++)
                tf_table_set_number(t, row, c++, tf_projection_decline_prob(pr, w, d));
        int conv = tf_sheets_all_converged(p);
        TRY(tf_table_set_text(t, row, c_conv, conv ? "passed" : "not all passed", err));
        if (!conv)
            TRY(tf_table_set_warning(t, row, c_conv, err));
    }
    TRY(tf_table_add_note(t, TF_NOTE_INFO, "One row per population with the figures of the first page.", err));
    return tf_report_add_table(r, t, "one row per population with the first page's figures", NULL, err);
fail:
    tf_table_free(t);
    return st;
}

tf_status tf_sheets_build(const tf_analysis *a, const tf_sheets_provenance *prov, tf_report *r, tf_error *err)
{
    tf_status st = summary_sheet(a, prov, r, err);
    if (st == TF_OK)
        st = overview_sheet(a, prov, r, err);
    for (size_t i = 0; st == TF_OK && i < tf_analysis_n_populations(a); i++) {
        const tf_analysis_pop *p = tf_analysis_population(a, i);
        size_t order[TF_ANALYSIS_MAX_MODELS];
        model_order(p, order);
        if ((st = counts_sheet(a, p, r, err)) != TF_OK || (st = projection_sheets(a, p, r, err)) != TF_OK ||
            (st = models_sheet(a, p, r, err)) != TF_OK || (st = change_sheet(a, p, order, r, err)) != TF_OK ||
            (st = parameters_sheet(a, p, order, r, err)) != TF_OK ||
            (st = diagnostics_sheet(a, p, order, !prov->omit_seconds, r, err)) != TF_OK || (st = draws_sheet(a, p, order, prov->workbook_draws, r, err)) != TF_OK)
            break;
    }
    return st;
}
