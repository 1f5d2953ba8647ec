/* The report's tables for an analysis; see analysis_tables.h. Every number here is read from the
 * analysis (fits, comparison, projection, model averages); nothing is estimated while laying
 * out. */
#include "tables/analysis_tables.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis/wording.h"
#include "compare/pareto.h"
#include "export/csv_out.h"
#include "project/cautions.h"
#include "tables/columns.h"
#include "tables/sensitivity_table.h"
#include "tables/fit_tables.h"
#include "tables/models_table.h"
#include "tables/populations_table.h"
#include "tables/projection_tables.h"
#include "tables/scenario_tables.h"
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
static const char *pop_title(const tf_analysis_tables_provenance *prov, const tf_analysis_pop *p)
{
    return tf_tables_population(tf_analysis_pop_series(p), prov->title);
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

/* Adds t to the report as population p's table of role: its sheet named by table_name, its CSV
 * file <role>.csv in the population's folder (prov->folders[pi]; the CSV folder itself when there
 * are none). The report owns t from here on, also on failure. */
static tf_status add_table(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov, tf_report *r,
                           tf_table *t, const char *role, const char *about, int csv_only, size_t *idx, tf_error *err)
{
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    char name[128];
    table_name(name, sizeof name, a, p, role);
    tf_status st = tf_table_set_name(t, name, err);
    if (st != TF_OK) {
        tf_table_free(t);
        return st;
    }
    size_t i;
    if ((st = tf_report_add_table(r, t, about, &i, err)) != TF_OK)
        return st;
    if (csv_only)
        tf_report_set_csv_only(r, i);
    if (idx)
        *idx = i;
    return tf_report_set_place(r, i, pop_title(prov, p), prov->folders ? prov->folders[pi] : NULL, role, err);
}

/* The models of p in order of decreasing probability, as the fit tables take them. */
static void table_models(const tf_analysis_pop *p, const size_t *order, tf_tables_model *out)
{
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p, order[i]);
        out[i] = (tf_tables_model){.name = m->name, .fit = m->fit, .excluded = m->state == TF_CANDIDATE_EXCLUDED,
                                   .note = m->note, .probability = m->probability,
                                   .pareto_k = m->evidence ? m->evidence->main.pareto_k : NAN};
    }
}

/* "Gompertz + Poisson". */
static void model_label(const tf_analysis_model *m, char *buf, size_t size)
{
    snprintf(buf, size, "%s + %s", m->growth->label, m->obs->label);
}

/* The risk windows that lie within the projection. */
static size_t n_risk_years(const tf_projection *pr)
{
    size_t n = 0;
    while (n < TF_ANALYSIS_N_RISK_YEARS && tf_analysis_risk_years[n] <= tf_projection_horizon(pr))
        n++;
    return n;
}

/* ---- per population: abundance, projection, models, fits ---- */

/* Counts and the model-averaged abundance per year, with its chart. */
static tf_status abundance_sheet(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov,
                                 const tf_tables_context *c, tf_report *r, tf_error *err)
{
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    const tf_series *s = tf_analysis_pop_series(p);
    size_t n = tf_series_n_years(s);
    tf_table *t = NULL;
    tf_status st = tf_tables_abundance(c, "average", tf_analysis_pop_year(p, 0), n, &t, err);
    if (st == TF_OK)
        st = tf_table_add_notef(t, TF_NOTE_INFO, err,
                                "Counts and the estimated true abundance of each year, averaged over the %zu fitted "
                                "models with each model weighted by its posterior probability (see the models sheet).",
                                tf_comparison_n_fitted(tf_analysis_pop_comparison(p)));
    if (st != TF_OK) {
        tf_table_free(t);
        return st;
    }
    int per_effort = tf_tables_per_effort(s);
    size_t c_year = tf_table_find_column(t, tf_column_name(TF_C_YEAR));
    size_t c_points = tf_table_find_column(t, tf_column_name(per_effort ? TF_C_COUNT_PER_EFFORT : TF_C_COUNT));
    size_t c_med = tf_table_find_column(t, tf_column_name(TF_C_MEDIAN));
    size_t c_lo = tf_table_find_column(t, tf_column_name(TF_C_LOWER_95));
    size_t c_hi = tf_table_find_column(t, tf_column_name(TF_C_UPPER_95));
    size_t idx;
    if ((st = add_table(a, pi, prov, r, t, "abundance", "counts and estimated abundance per year", 0, &idx, err)) !=
        TF_OK)
        return st;
    char points[TF_TABLES_UNIT_SIZE + 8], per[TF_TABLES_UNIT_SIZE];
    snprintf(points, sizeof points, "Count %s", tf_tables_per_what(s, per, sizeof per));
    tf_chart_series se[] = {
        {c_points, per_effort ? points : "Count", TF_SERIES_POINTS},
        {c_med, "Estimate", TF_SERIES_LINE},
        {c_lo, "95 % interval", TF_SERIES_BAND},
        {c_hi, "95 % interval (upper)", TF_SERIES_BAND},
    };
    char title[160], axis[TF_TABLES_UNIT_SIZE];
    snprintf(title, sizeof title, "Counts and estimated abundance: %s", pop_title(prov, p));
    tf_report_chart ch = {.kind = TF_CHART_XY, .title = title, .x_title = "Year",
                          .y_title = tf_tables_unit_title(s, axis, sizeof axis), .data = idx,
                          .x_column = c_year, .series = se, .n_series = 4, .place = TF_REPORT_SAME_SHEET};
    return tf_report_add_chart(r, &ch, err);
}

/* The projection's own tables, with a chart each for the bands and the risk curves. */
static tf_status projection_sheets(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov,
                                   tf_report *r, tf_error *err)
{
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    const tf_series *s = tf_analysis_pop_series(p);
    const tf_projection *pr = tf_analysis_pop_projection(p);
    char unit[TF_TABLES_UNIT_SIZE], per[TF_TABLES_UNIT_SIZE];
    tf_tables_per_what(s, per, sizeof per);
    tf_projection_place place = {.population = pop_title(prov, p), .model = "average",
                                 .unit = tf_tables_unit(s, unit, sizeof unit),
                                 .year0 = tf_series_first_year(s) + (int)tf_series_n_years(s) - 1};
    tf_table *t[TF_PROJECTION_N_TABLES];
    tf_status st = tf_projection_tables_build(pr, &place, t, err);
    if (st != TF_OK)
        return st;
    static const char *const roles[TF_PROJECTION_N_TABLES] = {"projection", "risk", "declines"};
    static const char *const about[TF_PROJECTION_N_TABLES] = {
        "projected abundance: median and bands", "chance of falling below each threshold, by year and threshold",
        "chance of declines of given sizes"};
    size_t idx[TF_PROJECTION_N_TABLES];
    for (size_t i = 0; i < TF_PROJECTION_N_TABLES; i++) {
        if (i == TF_PROJECTION_TABLE_BANDS)
            st = tf_table_add_note(t[i], TF_NOTE_INFO,
                                   "The futures start from the abundance of the last survey year and are shared among "
                                   "the models in proportion to their posterior probabilities.",
                                   err);
        size_t sq_years;
        double sq = tf_analysis_pop_status_quo(p, &sq_years);
        if (st == TF_OK && sq_years) {
            char text[200];
            st = tf_table_add_notef(t[i], TF_NOTE_INFO, err, "Removals go on as the status quo: %s.",
                                    tf_scenario_tables_status_quo(sq, sq_years, text, sizeof text));
        }
        if (st == TF_OK && tf_tables_per_effort(s))
            st = tf_table_add_notef(t[i], TF_NOTE_INFO, err,
                                    "Effort is not 1 in every survey year, so abundances and thresholds in animals "
                                    "are %s.",
                                    per);
        /* The report owns the table from here on, also when adding fails. */
        tf_table *mine = t[i];
        t[i] = NULL;
        if (st != TF_OK) {
            tf_table_free(mine);
            break;
        }
        if ((st = add_table(a, pi, prov, r, mine, roles[i], about[i], 0, &idx[i], err)) != TF_OK)
            break;
    }
    tf_projection_tables_free(t);
    if (st != TF_OK)
        return st;
    const tf_table *bands = tf_report_table(r, idx[TF_PROJECTION_TABLE_BANDS]);
    size_t c_year = tf_table_find_column(bands, tf_column_name(TF_C_YEAR));
    tf_chart_series se[] = {
        {tf_table_find_column(bands, tf_column_name(TF_C_MEDIAN)), "Median", TF_SERIES_LINE},
        {tf_table_find_column(bands, tf_column_name(TF_C_LOWER_95)), "95 % band", TF_SERIES_BAND},
        {tf_table_find_column(bands, tf_column_name(TF_C_UPPER_95)), "95 % band (upper)", TF_SERIES_BAND},
    };
    char title[160];
    snprintf(title, sizeof title, "Projected abundance: %s", pop_title(prov, p));
    char animals[TF_TABLES_UNIT_SIZE];
    tf_tables_unit_title(s, animals, sizeof animals);
    tf_report_chart ch = {.kind = TF_CHART_XY, .title = title, .x_title = "Year", .y_title = animals,
                          .data = idx[TF_PROJECTION_TABLE_BANDS], .x_column = c_year, .series = se, .n_series = 3,
                          .place = TF_REPORT_SAME_SHEET};
    if ((st = tf_report_add_chart(r, &ch, err)) != TF_OK)
        return st;
    /* The risk table holds one block of rows per threshold, years 0..horizon: one line each. */
    size_t n_th = tf_projection_n_thresholds(pr), h = tf_projection_horizon(pr);
    if (n_th == 0)
        return TF_OK;
    const tf_table *risk = tf_report_table(r, idx[TF_PROJECTION_TABLE_RISK]);
    size_t c_p = tf_table_find_column(risk, tf_column_name(TF_C_PROBABILITY));
    tf_chart_series rs[TF_PROJECT_MAX_THRESHOLDS];
    char names[TF_PROJECT_MAX_THRESHOLDS][64];
    for (size_t k = 0; k < n_th; k++) {
        tf_threshold th = tf_projection_threshold(pr, k);
        char label[48];
        tf_project_threshold_label(&th, label, sizeof label);
        snprintf(names[k], sizeof names[k], "Below %s", label);
        rs[k] = (tf_chart_series){c_p, names[k], TF_SERIES_LINE};
    }
    snprintf(title, sizeof title, "Chance of falling below each threshold: %s", pop_title(prov, p));
    tf_report_chart rc = {.kind = TF_CHART_XY, .title = title, .x_title = "Year", .y_title = "Probability",
                          .data = idx[TF_PROJECTION_TABLE_RISK],
                          .x_column = tf_table_find_column(risk, tf_column_name(TF_C_YEAR)), .series = rs,
                          .n_series = n_th, .first_row = 0, .n_rows = h + 1, .series_stride = h + 1,
                          .place = TF_REPORT_SAME_SHEET};
    return tf_report_add_chart(r, &rc, err);
}

/* The scenarios' tables (tables/scenario_tables.h), each on a sheet of its own, and one chart
 * with a quasi-extinction curve (first threshold) per scenario. The sheet names of several
 * populations use short roles, since a label of LABEL_IN_NAME characters and the CSV stem
 * "scenario-differences" would pass Excel's 31 characters. */
static tf_status scenario_sheets(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov,
                                 tf_report *r, tf_error *err)
{
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    const tf_scenario_set *set = tf_analysis_pop_scenarios(p);
    if (!set)
        return TF_OK;
    const tf_series *s = tf_analysis_pop_series(p);
    char unit[TF_TABLES_UNIT_SIZE];
    tf_projection_place place = {.population = pop_title(prov, p), .model = "average",
                                 .unit = tf_tables_unit(s, unit, sizeof unit),
                                 .year0 = tf_series_first_year(s) + (int)tf_series_n_years(s) - 1};
    size_t sq_years;
    double sq = tf_analysis_pop_status_quo(p, &sq_years);
    tf_table *t[TF_SCENARIO_N_TABLES];
    tf_status st = tf_scenario_tables_build(set, &place, sq, sq_years, t, err);
    if (st != TF_OK)
        return st;
    static const char *const csv[TF_SCENARIO_N_TABLES] = {TF_SCENARIO_CURVES_NAME, TF_SCENARIO_DIFFERENCES_NAME,
                                                          TF_SCENARIO_DECLINES_NAME};
    static const char *const sheet_one[TF_SCENARIO_N_TABLES] = {"Scenarios", "Scenario differences",
                                                                "Scenario declines"};
    static const char *const sheet_many[TF_SCENARIO_N_TABLES] = {"scenarios", "sc-diffs", "sc-declines"};
    static const char *const about[TF_SCENARIO_N_TABLES] = {
        "each management scenario's chance of falling below each threshold and its abundance bands",
        "each scenario's chance of falling below each threshold minus the status quo's, with paired errors",
        "each scenario's chance of declines and its difference from the status quo"};
    size_t idx[TF_SCENARIO_N_TABLES];
    for (size_t i = 0; i < TF_SCENARIO_N_TABLES; i++) {
        tf_table *mine = t[i];
        t[i] = NULL;
        char name[128];
        if (tf_analysis_n_populations(a) == 1)
            snprintf(name, sizeof name, "%s", sheet_one[i]);
        else
            table_name(name, sizeof name, a, p, sheet_many[i]);
        if ((st = tf_table_set_name(mine, name, err)) != TF_OK) {
            tf_table_free(mine);
            break;
        }
        if ((st = tf_report_add_table(r, mine, about[i], &idx[i], err)) != TF_OK ||
            (st = tf_report_set_place(r, idx[i], pop_title(prov, p), prov->folders ? prov->folders[pi] : NULL, csv[i],
                                      err)) != TF_OK)
            break;
    }
    tf_scenario_tables_free(t);
    const tf_projection *pr = tf_scenario_set_status_quo(set);
    size_t n_sc = tf_scenario_set_n(set), n_th = tf_projection_n_thresholds(pr), h = tf_projection_horizon(pr);
    if (st != TF_OK || n_th == 0 || n_sc == 0)
        return st;
    const tf_table *curves = tf_report_table(r, idx[TF_SCENARIO_TABLE_CURVES]);
    size_t c_p = tf_table_find_column(curves, tf_column_name(TF_C_PROBABILITY));
    tf_chart_series cs[TF_SCENARIO_MAX];
    for (size_t i = 0; i < n_sc; i++)
        cs[i] = (tf_chart_series){c_p, tf_scenario_set_scenario(set, i)->label, TF_SERIES_LINE};
    char title[200], th[48];
    tf_threshold k0 = tf_projection_threshold(pr, 0);
    snprintf(title, sizeof title, "Chance of falling below %s%s by scenario: %s",
             tf_project_threshold_label(&k0, th, sizeof th), k0.relative ? " of current" : "", pop_title(prov, p));
    /* Rows run scenario by scenario, each with its thresholds' blocks of years 0..horizon: the
     * first block of each scenario is its curve for the first threshold. */
    tf_report_chart ch = {.kind = TF_CHART_XY, .title = title, .x_title = "Year", .y_title = "Probability",
                          .data = idx[TF_SCENARIO_TABLE_CURVES],
                          .x_column = tf_table_find_column(curves, tf_column_name(TF_C_YEAR)), .series = cs,
                          .n_series = n_sc, .first_row = 0, .n_rows = h + 1, .series_stride = n_th * (h + 1),
                          .place = TF_REPORT_SAME_SHEET};
    return tf_report_add_chart(r, &ch, err);
}

static tf_status models_sheet(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov, tf_report *r,
                              tf_error *err)
{
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    const tf_comparison *cmp = tf_analysis_pop_comparison(p);
    tf_table *t = tf_compare_table(cmp, pop_title(prov, p), err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    size_t idx;
    tf_status st = add_table(a, pi, prov, r, t, "models",
                             "model comparison: marginal likelihoods and posterior model probabilities", 0, &idx, err);
    if (st != TF_OK)
        return st;
    /* The fitted models come first in the table (tf_compare_table_order). */
    size_t n_fitted = tf_comparison_n_fitted(cmp);
    if (n_fitted == 0)
        return TF_OK;
    const tf_table *mt = tf_report_table(r, idx);
    char title[160];
    snprintf(title, sizeof title, "Posterior model probabilities: %s", pop_title(prov, p));
    tf_chart_series se[] = {{tf_table_find_column(mt, tf_column_name(TF_C_MODEL_PROB)), "Posterior probability",
                             TF_SERIES_LINE}};
    tf_report_chart ch = {.kind = TF_CHART_COLUMNS, .title = title, .y_title = "Probability", .data = idx,
                          .x_column = tf_table_find_column(mt, tf_column_name(TF_C_MODEL)), .series = se,
                          .n_series = 1, .n_rows = n_fitted, .place = TF_REPORT_SAME_SHEET};
    return tf_report_add_chart(r, &ch, err);
}

/* The prior sensitivity, when it was made (tables/sensitivity_table.h). */
static tf_status sensitivity_sheet(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov,
                                   tf_report *r, tf_error *err)
{
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    const tf_sensitivity *sens = tf_analysis_pop_sensitivity(p);
    if (!sens)
        return TF_OK;
    tf_table *t;
    tf_status st = tf_sensitivity_table(sens, tf_analysis_pop_sens_row(p, 0), tf_analysis_pop_projection(p),
                                        pop_title(prov, p), &t, err);
    if (st != TF_OK)
        return st;
    return add_table(a, pi, prov, r, t, TF_SENSITIVITY_TABLE_NAME,
                     "model probabilities and risks under wider and narrower priors", 0, NULL, err);
}

/* change, parameters, diagnostics, chains and draws: the fit tables of every command. */
static tf_status fit_sheets(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov,
                            const tf_tables_context *c, tf_report *r, tf_error *err)
{
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    size_t order[TF_ANALYSIS_MAX_MODELS];
    tf_tables_model models[TF_ANALYSIS_MAX_MODELS];
    size_t n = tf_analysis_pop_n_models(p);
    tf_analysis_pop_by_probability(p, order);
    table_models(p, order, models);
    const tf_analysis_trend *whole = tf_analysis_pop_trend(p), *recent = tf_analysis_pop_trend_recent(p);
    tf_fit_trend_summary avg[2];
    for (size_t k = 0; k < 2; k++) {
        const tf_analysis_trend *tr = k ? recent : whole;
        avg[k] = (tf_fit_trend_summary){tr->first_year, tr->last_year, tr->mean,      tr->median, tr->q025,
                                        tr->q975,       tr->p_decline, NAN, NAN};
    }
    tf_table *t = NULL;
    tf_status st = tf_tables_change_of(c, models, n, avg, &t, err);
    if (st == TF_OK)
        st = add_table(a, pi, prov, r, t, "change", "average annual change per model and averaged", 0, NULL, err);
    if (st == TF_OK && (st = tf_tables_parameters(c, models, n, &t, err)) == TF_OK)
        st = add_table(a, pi, prov, r, t, "parameters", "parameter summaries per model", 0, NULL, err);
    if (st == TF_OK && (st = tf_tables_diagnostics(c, models, n, &t, err)) == TF_OK)
        st = add_table(a, pi, prov, r, t, "diagnostics", "sampler diagnostics per model", 0, NULL, err);
    if (st == TF_OK && (st = tf_tables_chains(c, models, n, &t, err)) == TF_OK)
        st = add_table(a, pi, prov, r, t, "chains", "the sampler's record of each chain", 0, NULL, err);
    if (st != TF_OK || (st = tf_tables_draws(c, models, n, &t, err)) != TF_OK)
        return st;
    int too_long = tf_table_n_rows(t) > TF_REPORT_SHEET_ROWS;
    return add_table(a, pi, prov, r, t, "draws",
                     too_long             ? "raw posterior draws of every model (CSV only: too many rows for a sheet)"
                     : prov->workbook_draws ? "raw posterior draws of every model"
                                            : "raw posterior draws of every model (CSV only; --workbook-draws puts "
                                              "them in the workbook)",
                     too_long || !prov->workbook_draws, NULL, err);
}

/* ---- the first page and the overview ---- */

void tf_analysis_tables_sentences(const tf_analysis *a, size_t population, char *buf, size_t size)
{
    const tf_analysis_pop *p = tf_analysis_population(a, population);
    char trend[512] = "", recent[512] = "", risk[512] = "";
    tf_wording_trend(tf_analysis_pop_trend(p), trend, sizeof trend);
    tf_wording_recent(tf_analysis_pop_trend(p), tf_analysis_pop_trend_recent(p), recent, sizeof recent);
    const tf_projection *pr = tf_analysis_pop_projection(p);
    if (tf_projection_n_thresholds(pr) > 0) {
        /* The middle window when the horizon reaches it (20 years), else the horizon. */
        size_t years = tf_projection_horizon(pr) >= tf_analysis_risk_years[1] ? tf_analysis_risk_years[1]
                                                                              : tf_projection_horizon(pr);
        tf_threshold th = tf_projection_threshold(pr, 0);
        char unit[TF_TABLES_UNIT_SIZE];
        tf_wording_risk(&th, tf_tables_unit(tf_analysis_pop_series(p), unit, sizeof unit), years,
                        tf_projection_risk(pr, 0, years), risk, sizeof risk);
        /* Every projected figure rests on the status quo: say it where the headline is. */
        size_t sq_years;
        double sq = tf_analysis_pop_status_quo(p, &sq_years);
        size_t used = strlen(risk);
        if (sq_years && sq != 0 && used < sizeof risk)
            snprintf(risk + used, sizeof risk - used,
                     " This assumes that %s go on at about %.0f animals a year, their mean over the last %zu survey "
                     "years.",
                     sq > 0 ? "removals" : "releases", fabs(sq), sq_years);
    }
    snprintf(buf, size, "%s%s%s%s%s", trend, recent[0] ? " " : "", recent, risk[0] ? " " : "", risk);
}

/* Where the population's raw draws are: the first page says it, since by default they are not in
 * the workbook. The file name is the one the report gives the draws table (its name made a file
 * name, export/csv_out.h). */
static tf_status draws_item(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov, tf_table *t,
                            tf_error *err)
{
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    char name[128], file[160], text[512];
    table_name(name, sizeof name, a, p, "draws");
    snprintf(file, sizeof file, "%s%sdraws.csv", prov->folders ? prov->folders[pi] : "", prov->folders ? "/" : "");
    size_t n_rows = 0;
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++)
        if (tf_analysis_pop_model(p, i)->fit)
            n_rows += tf_fit_n_draws(tf_analysis_pop_model(p, i)->fit);
    const char *place = prov->csv_place ? prov->csv_place : "the CSV files written with this workbook";
    /* One text and no note: it spans the note column. */
    if (prov->workbook_draws && n_rows <= TF_REPORT_SHEET_ROWS)
        snprintf(text, sizeof text, "every kept draw of every model: on the sheet '%s', and as %s in %s", name, file,
                 place);
    else
        snprintf(text, sizeof text, "CSV only: %s in %s (--workbook-draws adds a sheet)", file, place);
    return tf_table_add_item_text(t, "Raw posterior draws", text, NULL, err);
}

/* A Monte Carlo standard error for reading: "< 0.001" below what three decimals show, else with
 * enough digits to be non-zero. */
static const char *mcse_text(double v, char *buf, size_t size)
{
    if (!(v >= 0.0005))
        snprintf(buf, size, "%s", isnan(v) ? "not available" : "< 0.001");
    else
        snprintf(buf, size, "%.3f", v);
    return buf;
}

static tf_status population_items(const tf_analysis *a, size_t pi, const tf_analysis_tables_provenance *prov, tf_table *t,
                                  tf_error *err)
{
    tf_status st;
    const tf_analysis_pop *p = tf_analysis_population(a, pi);
    const tf_series *s = tf_analysis_pop_series(p);
    const tf_projection *pr = tf_analysis_pop_projection(p);
    size_t n = tf_series_n_years(s);
    int y0 = tf_series_first_year(s), y1 = y0 + (int)n - 1;
    char text[1024], note[256];
    char unit[TF_TABLES_UNIT_SIZE];
    tf_tables_unit(s, unit, sizeof unit);

    TRY(tf_table_set_summary_population(t, pop_title(prov, p), err));
    snprintf(text, sizeof text, "Population: %s", pop_title(prov, p));
    TRY(tf_table_add_heading(t, text, err));
    tf_analysis_tables_sentences(a, pi, text, sizeof text);
    TRY(tf_table_add_item_text(t, "In brief", text, NULL, err));
    snprintf(text, sizeof text, "%d-%d", y0, y1);
    snprintf(note, sizeof note, "%zu years, %zu of them surveyed", n, tf_series_n_surveyed(s));
    TRY(tf_table_add_item_text(t, "Survey years", text, note, err));

    const tf_analysis_year *last = tf_analysis_pop_year(p, n - 1);
    snprintf(text, sizeof text, "Abundance in %d (%s)", y1, unit);
    snprintf(note, sizeof note, "posterior median, averaged over the models");
    TRY(tf_table_add_item_number(t, text, last->median, TF_COL_NUMBER, note, err));
    TRY(tf_table_add_item_number(t, "  lower 95 %", last->q025, TF_COL_NUMBER, "2.5 % posterior quantile", err));
    TRY(tf_table_add_item_number(t, "  upper 95 %", last->q975, TF_COL_NUMBER, "97.5 % posterior quantile", err));

    /* The trend over every survey year, then over the last years: "declining" is read as "still
     * declining", and a decline in the first years alone says little about now. */
    const tf_analysis_trend *trends[2] = {tf_analysis_pop_trend(p), tf_analysis_pop_trend_recent(p)};
    for (size_t k = 0; k < 2; k++) {
        const tf_analysis_trend *tr = trends[k];
        if (k == 1 && tr->first_year == trends[0]->first_year)
            break;   /* the survey is no longer than the recent period */
        if (k == 0)
            snprintf(text, sizeof text, "Trend over %d-%d", tr->first_year, tr->last_year);
        else
            snprintf(text, sizeof text, "Recent trend, %d-%d", tr->first_year, tr->last_year);
        snprintf(note, sizeof note, "yearly change, median; a line through %s", k ? "the last years" : "every year");
        TRY(tf_table_add_item_number(t, text, tr->median, TF_COL_PERCENT, note, err));
        TRY(tf_table_add_item_number(t, "  lower 95 %", tr->q025, TF_COL_PERCENT, NULL, err));
        TRY(tf_table_add_item_number(t, "  upper 95 %", tr->q975, TF_COL_PERCENT, NULL, err));
        snprintf(text, sizeof text, "Chance of a downward trend over %d-%d", tr->first_year, tr->last_year);
        TRY(tf_table_add_item_number(t, text, tr->p_decline, TF_COL_PERCENT,
                                     "posterior probability that the slope is negative", err));
    }

    size_t g = tf_analysis_pop_best_growth(p);
    TRY(tf_table_add_item_text(t, "Best-supported growth model", tf_analysis_pop_growth(p, g)->label, NULL, err));
    TRY(tf_table_add_item_number(t, "  its probability", tf_analysis_pop_growth_probability(p, g), TF_COL_PERCENT,
                                 "summed over the counting-error models it was paired with", err));
    if (tf_analysis_growth_levels_off(tf_analysis_pop_growth(p, g))) {
        snprintf(text, sizeof text, "%s growth slows near a carrying capacity: its projection levels off there, "
                 "and a past decline does not go on in it", tf_analysis_pop_growth(p, g)->label);
        TRY(tf_table_add_item_text(t, "  what it implies", text, NULL, err));
    }
    const tf_analysis_model *best = tf_analysis_pop_model(p, tf_analysis_pop_best(p));
    model_label(best, text, sizeof text);
    TRY(tf_table_add_item_text(t, "Best-supported model", text, NULL, err));
    TRY(tf_table_add_item_number(t, "  its probability", best->probability, TF_COL_PERCENT, NULL, err));
    /* Marginal likelihoods depend on the priors' width (compare/sensitivity.h): how far the
     * verdict moves with them, and a caution when the best model changes. */
    char caution[512];
    tf_wording_prior_sensitivity(p, unit, text, sizeof text, caution, sizeof caution);
    if (text[0])
        TRY(tf_table_add_item_text(t, "  under other priors", text, NULL, err));
    if (caution[0]) {
        TRY(tf_table_add_item_text(t, "  caution", caution, NULL, err));
        TRY(tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err));
    }

    /* Two questions that read alike: a fall below a threshold at any time up to a year, and a
     * decline measured in one year. Each block has its heading and each label says which. */
    size_t nry = n_risk_years(pr);
    char se[32];
    if (tf_projection_n_thresholds(pr) > 0)
        TRY(tf_table_add_heading(t, "Chance of quasi-extinction: falling below a threshold at any time within the "
                                    "years", err));
    for (size_t k = 0; k < tf_projection_n_thresholds(pr); k++) {
        tf_threshold th = tf_projection_threshold(pr, k);
        /* Short labels under the block's heading, so that each fits the item column in two lines. */
        char words[256], pct[32];
        if (th.relative)
            snprintf(words, sizeof words, "%s %% of current", tf_wording_percent(100 * th.value, pct, sizeof pct));
        else
            snprintf(words, sizeof words, "%.15g %s", th.value, unit);
        for (size_t y = 0; y < nry; y++) {
            size_t yr = tf_analysis_risk_years[y];
            snprintf(text, sizeof text, "Below %s at any time within %zu years", words, yr);
            snprintf(note, sizeof note, "by %d; Monte Carlo s.e. %s", y1 + (int)yr,
                     mcse_text(tf_projection_risk_se(pr, k, yr), se, sizeof se));
            TRY(tf_table_add_item_number(t, text, tf_projection_risk(pr, k, yr), TF_COL_PERCENT, note, err));
        }
    }
    if (tf_projection_n_windows(pr) > 0 && tf_projection_n_declines(pr) > 0)
        TRY(tf_table_add_heading(t, "Chance of a decline: the abundance in the year named against today's", err));
    for (size_t w = 0; w < tf_projection_n_windows(pr); w++)
        for (size_t d = 0; d < tf_projection_n_declines(pr); d++) {
            char pct[32];
            size_t yr = tf_projection_window(pr, w);
            snprintf(text, sizeof text, "At least %s %% below current in year %zu",
                     tf_wording_percent(100 * tf_projection_decline(pr, d), pct, sizeof pct), yr);
            snprintf(note, sizeof note, "in %d; Monte Carlo s.e. %s", y1 + (int)yr,
                     mcse_text(tf_projection_decline_se(pr, w, d), se, sizeof se));
            TRY(tf_table_add_item_number(t, text, tf_projection_decline_prob(pr, w, d), TF_COL_PERCENT, note, err));
        }
    {
        size_t sq_years;
        double sq = tf_analysis_pop_status_quo(p, &sq_years);
        TRY(tf_scenario_tables_first_page(t, tf_analysis_pop_scenarios(p), tf_analysis_pop_safe_removal(p), sq,
                                          sq_years, y1, err));
    }
    int conv = tf_populations_all_converged(p);
    TRY(tf_table_add_item_text(t, "Sampler checks", conv ? "passed" : "not all passed",
                               conv ? "every fit passed the R-hat and ESS checks"
                                    : "some fits failed the R-hat or ESS checks: see the diagnostics sheet",
                               err));
    if (!conv)
        TRY(tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err));
    TRY(draws_item(a, pi, prov, t, err));
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

static tf_status provenance_items(const tf_analysis *a, const tf_analysis_tables_provenance *prov, tf_table *t, tf_error *err)
{
    tf_status st;
    const tf_analysis_options *o = tf_analysis_options_of(a);
    char text[1024];
    TRY(tf_table_add_heading(t, "How this was made", err));
    TRY(tf_table_add_item_text(t, "Survey file", prov->input_name, NULL, err));
    TRY(tf_table_add_item_text(t, "SHA-256 of the file", prov->sha256, NULL, err));
    TRY(tf_table_add_item_text(t, "Program", "tallyfit " TF_VERSION, NULL, err));
    TRY(tf_table_add_item_text(t, "Run on", prov->date, NULL, err));
    if (o->estimates)
        TRY(tf_table_add_item_text(t, "Counts", "read as estimates (--estimates), not whole counts",
                                   "so only counting-error models of continuous amounts (log-normal) were fitted",
                                   err));
    double removed = 0, added = 0;
    for (size_t i = 0; i < tf_analysis_n_populations(a); i++) {
        const tf_series *s = tf_analysis_pop_series(tf_analysis_population(a, i));
        for (size_t k = 0; s && k < tf_series_n_years(s); k++)
            removed += tf_series_removed(s, k), added += tf_series_added(s, k);
    }
    double q = o->counted_fraction > 0 ? o->counted_fraction : 1.0;
    if (removed > 0 || added > 0 || q != 1) {
        snprintf(text, sizeof text, "a count at effort 1 includes %.3g %% of the animals present (--counted-fraction)",
                 100 * q);
        TRY(tf_table_add_item_text(t, "Counted fraction", text,
                                   "links animals removed or released to the abundance in count units", err));
    }
    if (removed > 0 || added > 0) {
        snprintf(text, sizeof text, "%.10g animals removed and %.10g added over the survey years, as the survey lists them",
                 removed, added);
        TRY(tf_table_add_item_text(t, "Removals and releases", text,
                                   "each year's removals and releases act on the abundance after the count, before the "
                                   "year's growth: the fitted growth rate is that of the population before removals",
                                   err));
    }
    static const char seed_note[] = "the same seed and settings give the same numbers";
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
                 "PMMH, %zu chains x %zu iterations (+%zu warm-up), at most %zu draws kept each; %s, %s proposal",
                 o->fit.n_chains, o->fit.max_iter, o->fit.n_warmup, o->fit.max_kept, particles, tf_filter_proposal_name(o->fit.proposal));
    else
        snprintf(text, sizeof text,
                 "PMMH, %zu chains, %zu warm-up, until R-hat <= %.2f and ESS >= %.0f (%zu to %zu iterations), "
                 "at most %zu draws kept each; %s, %s proposal",
                 o->fit.n_chains, o->fit.n_warmup, TF_FIT_RHAT_MAX, o->fit.min_ess, o->fit.min_iter, o->fit.max_iter,
                 o->fit.max_kept, particles, tf_filter_proposal_name(o->fit.proposal));
    TRY(tf_table_add_item_text(t, "Sampler", text, NULL, err));
    const tf_projection *pr = tf_analysis_pop_projection(p0);
    snprintf(text, sizeof text, "%zu simulated futures over %zu years, models weighted by their posterior probabilities",
             tf_projection_n_runs(pr), tf_projection_horizon(pr));
    TRY(tf_table_add_item_text(t, "Projection", text, NULL, err));
    if (o->evidence.target_se > 0)
        snprintf(text, sizeof text,
                 "importance sampling squared, until the s.e. of log p(y) is at most %.2f (at most %zu draws)",
                 o->evidence.target_se, o->evidence.n_draws);
    else
        snprintf(text, sizeof text, "importance sampling squared, %zu draws per importance density", o->evidence.n_draws);
    TRY(tf_table_add_item_text(t, "Marginal likelihoods", text, NULL, err));
    return TF_OK;
fail:
    return st;
}

/* The words page one uses, in plain words (common practice of a report's glossary, no source). */
static tf_status glossary_items(tf_table *t, tf_error *err)
{
    static const char *const words[][2] = {
        {"Posterior median", "as likely above as below, given the model"},
        {"95 % interval", "holds the true value with 95 % probability"},
        {"Trend", "yearly change along a line through the years"},
        {"Growth model", "how numbers change; all but exponential level off"},
        {"Model probability", "how strongly the counts support a model"},
        {"Quasi-extinction", "falling below a threshold at any time"},
        {"Monte Carlo s.e.", "error from simulating a limited number of futures"},
    };
    tf_status st = tf_table_add_heading(t, "Words used on this page", err);
    for (size_t i = 0; st == TF_OK && i < sizeof words / sizeof words[0]; i++)
        st = tf_table_add_item_text(t, words[i][0], words[i][1], NULL, err);
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

static tf_status summary_sheet(const tf_analysis *a, const tf_analysis_tables_provenance *prov, tf_report *r, tf_error *err)
{
    tf_status st;
    tf_table *t = tf_table_new_summary("Summary", err);
    if (!t)
        return tf_error_status(err);
    TRY(tf_table_add_notef(t, TF_NOTE_INFO, err, "Population trend and risk from the survey %s (%s).", prov->title,
                           prov->input_name));
    /* The cautions first, once: the reader meets them before any figure (the notes above the
     * table would say them a second time). */
    TRY(tf_table_add_heading(t, "Cautions", err));
    for (size_t i = 0; i < tf_project_n_cautions(); i++) {
        char label[32];
        snprintf(label, sizeof label, "Caution %zu", i + 1);
        TRY(tf_table_add_item_text(t, label, tf_project_caution(i), NULL, err));
    }
    for (size_t i = 0; i < tf_analysis_n_populations(a); i++)
        TRY(population_items(a, i, prov, t, err));
    TRY(tf_table_set_summary_population(t, NULL, err));
    TRY(glossary_items(t, err));
    TRY(outlier_items(a, t, err));
    for (size_t i = 0; prov->left_out_from && i < tf_survey_n_rejected(prov->left_out_from); i++) {
        const tf_survey_rejected *x = tf_survey_rejected_at(prov->left_out_from, i);
        char text[700], note[64];
        snprintf(text, sizeof text, "'%.100s', not analysed: %s", x->label, x->what);
        snprintf(note, sizeof note, "line %ld of the survey file", x->line);
        TRY(tf_table_add_item_text(t, "Population left out", text, note, err));
    }
    TRY(provenance_items(a, prov, t, err));
    size_t idx;
    tf_table *mine = t;
    t = NULL;
    TRY(tf_report_add_table(r, mine, "the first page: findings, cautions and provenance", &idx, err));
    return tf_report_set_place(r, idx, NULL, NULL, "summary", err);
fail:
    tf_table_free(t);
    return st;
}

/* One row per population with the first page's figures as numbers: the batch's table too. */
static tf_status overview_sheet(const tf_analysis *a, const tf_analysis_tables_provenance *prov, tf_report *r,
                                tf_error *err)
{
    const tf_project_options *po = &tf_analysis_options_of(a)->project;
    tf_table *t = tf_populations_table_new(po, "Populations", err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    tf_status st = TF_OK;
    for (size_t i = 0; i < tf_analysis_n_populations(a) && st == TF_OK; i++) {
        const tf_analysis_pop *p = tf_analysis_population(a, i);
        st = tf_populations_table_add(t, po, pop_title(prov, p), tf_analysis_pop_series(p), p, TF_POPULATION_DONE,
                                      NULL, err);
    }
    if (st == TF_OK)
        st = tf_table_add_note(t, TF_NOTE_INFO, "One row per population with the figures of the first page.", err);
    if (st != TF_OK) {
        tf_table_free(t);
        return st;
    }
    tf_table_set_filter(t, tf_analysis_n_populations(a) > 1);
    size_t idx;
    if ((st = tf_report_add_table(r, t, "one row per population with the first page's figures", &idx, err)) != TF_OK)
        return st;
    return tf_report_set_place(r, idx, NULL, NULL, TF_POPULATIONS_TABLE_NAME, err);
}

tf_status tf_analysis_tables_build(const tf_analysis *a, const tf_analysis_tables_provenance *prov, tf_report *r,
                                   tf_error *err)
{
    tf_status st = summary_sheet(a, prov, r, err);
    if (st == TF_OK)
        st = overview_sheet(a, prov, r, err);
    for (size_t i = 0; st == TF_OK && i < tf_analysis_n_populations(a); i++) {
        const tf_analysis_pop *p = tf_analysis_population(a, i);
        tf_tables_context c = {.population = pop_title(prov, p), .series = tf_analysis_pop_series(p),
                               .omit_seconds = prov->omit_seconds};
        if ((st = abundance_sheet(a, i, prov, &c, r, err)) != TF_OK || (st = projection_sheets(a, i, prov, r, err)) != TF_OK ||
            (st = scenario_sheets(a, i, prov, r, err)) != TF_OK ||
            (st = models_sheet(a, i, prov, r, err)) != TF_OK || (st = sensitivity_sheet(a, i, prov, r, err)) != TF_OK ||
            (st = fit_sheets(a, i, prov, &c, r, err)) != TF_OK)
            break;
    }
    return st;
}
