/* Tables of management scenarios; see scenario_tables.h. Every number is read from the set. */
#include "tables/scenario_tables.h"

#include <math.h>
#include <stdio.h>

#include "analysis/analysis.h"
#include "tables/columns.h"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))

const char tf_scenario_tables_safe_caution[] =
    "The largest safe removal is a model-based figure under the stated assumptions: the fitted growth model, a "
    "constant yearly removal taken after each count, the counted fraction given, and no change in the "
    "population's conditions. It is not a quota: a quota is a decision for the responsible authority, under its "
    "own rules and with qualified practitioners.";

typedef struct {
    tf_column_id id;
    const char *legend;
} column;

static const column curve_columns[] = {
    {TF_C_SCENARIO, NULL},
    {TF_C_THRESHOLD, NULL},
    {TF_C_THRESHOLD_KIND, NULL},
    {TF_C_YEARS_AHEAD, NULL},
    {TF_C_YEAR, "calendar year (blank when the survey's years are not known)"},
    {TF_C_PROBABILITY, "share of the scenario's simulated futures at or below the threshold in at least one year up "
                       "to this one"},
    {TF_C_PROBABILITY_MCSE, "Monte Carlo standard error of the probability, sqrt(p (1 - p) / runs)"},
    {TF_C_UNIT, NULL},
    {TF_C_MEDIAN, "median abundance of the scenario's simulated futures"},
    {TF_C_LOWER_50, "25 % quantile of the simulated abundance"},
    {TF_C_UPPER_50, "75 % quantile of the simulated abundance"},
    {TF_C_LOWER_95, "2.5 % quantile of the simulated abundance"},
    {TF_C_UPPER_95, "97.5 % quantile of the simulated abundance"},
};
static const tf_band band_order[] = {TF_BAND_MEDIAN, TF_BAND_P25, TF_BAND_P75, TF_BAND_P025, TF_BAND_P975};

static const column difference_columns[] = {
    {TF_C_SCENARIO, NULL},
    {TF_C_THRESHOLD, NULL},
    {TF_C_THRESHOLD_KIND, NULL},
    {TF_C_YEARS_AHEAD, NULL},
    {TF_C_YEAR, "calendar year (blank when the survey's years are not known)"},
    {TF_C_PROBABILITY, "the scenario's chance of having been at or below the threshold by this year"},
    {TF_C_DIFFERENCE, NULL},
    {TF_C_DIFFERENCE_MCSE, NULL},
};

static const column decline_columns[] = {
    {TF_C_SCENARIO, NULL},
    {TF_C_WINDOW_YEARS, NULL},
    {TF_C_DECLINE, "decline from the current abundance, a fraction"},
    {TF_C_PROBABILITY, "chance that the abundance after the window is at most (1 - decline) times the current one"},
    {TF_C_PROBABILITY_MCSE, "Monte Carlo standard error of the probability, sqrt(p (1 - p) / runs)"},
    {TF_C_DIFFERENCE, NULL},
    {TF_C_DIFFERENCE_MCSE, NULL},
};

#define FIRST 2

char *tf_scenario_tables_status_quo(double animals, size_t n_years, char *buf, size_t size)
{
    if (n_years == 0)
        snprintf(buf, size, "no removals or releases (none recorded)");
    else if (animals >= 0)
        snprintf(buf, size, "a net removal of %.4g animals a year, the mean of the last %zu survey years", animals,
                 n_years);
    else
        snprintf(buf, size, "a net release of %.4g animals a year, the mean of the last %zu survey years", -animals,
                 n_years);
    return buf;
}

char *tf_scenario_tables_safe_value(const tf_safe_removal *r, char *buf, size_t size)
{
    if (r->ask.share)
        snprintf(buf, size, "%.3g %% of the population a year (Monte Carlo se %.2g %%)", 100 * r->value,
                 100 * r->mcse);
    else
        snprintf(buf, size, "%.4g animals a year (Monte Carlo se %.2g)", r->value, r->mcse);
    return buf;
}

char *tf_scenario_tables_safe_note(const tf_safe_removal *r, char *buf, size_t size)
{
    char th[48];
    tf_project_threshold_label(&r->threshold, th, sizeof th);
    if (r->exceeded_at_zero)
        snprintf(buf, size,
                 "even with no removal the chance of reaching the threshold %s within %zu years is %.3g, above the "
                 "%.3g asked: no removal keeps it there",
                 th, r->ask.years, r->risk_at_zero, r->ask.risk);
    else
        snprintf(buf, size,
                 "the largest constant yearly removal from next year on that keeps the chance of reaching the "
                 "threshold %s (the first --threshold) within %zu years at or below %.3g (it is %.3g there, se "
                 "%.2g, over %zu simulated futures)",
                 th, r->ask.years, r->ask.risk, r->risk_at_value, r->risk_at_value_mcse, r->n_runs);
    return buf;
}

static tf_table *new_table(const char *name, const column *cols, size_t n_cols, const tf_scenario_set *s,
                           const char *status_quo, tf_error *err)
{
    tf_table *t = tf_table_new(name, err);
    if (!t)
        return NULL;
    if (tf_columns_add(t, TF_C_POPULATION, NULL, NULL, err) != TF_OK ||
        tf_columns_add(t, TF_C_MODEL, "the model projected: its name, 'average' over the models, or 'fixed' "
                                      "parameters", NULL, err) != TF_OK)
        goto fail;
    for (size_t j = 0; j < n_cols; j++)
        if (tf_columns_add(t, cols[j].id, cols[j].legend, NULL, err) != TF_OK)
            goto fail;
    const tf_projection *sq = tf_scenario_set_status_quo(s);
    if (tf_table_add_notef(t, TF_NOTE_INFO, err,
                           "Each scenario is projected with the same %zu simulated futures as the status quo (the same "
                           "posterior draws and random numbers), %zu years ahead; the status quo is in the projection "
                           "tables.",
                           tf_projection_n_runs(sq), tf_projection_horizon(sq)) != TF_OK ||
        tf_table_add_notef(t, TF_NOTE_INFO, err, "Status quo: %s.", status_quo) != TF_OK)
        goto fail;
    for (size_t i = 0; i < tf_scenario_set_n(s); i++) {
        char what[160];
        if (tf_table_add_notef(t, TF_NOTE_INFO, err, "Scenario '%s': %s.", tf_scenario_set_scenario(s, i)->label,
                               tf_scenario_describe(tf_scenario_set_scenario(s, i), what, sizeof what)) != TF_OK)
            goto fail;
    }
    if (tf_projection_tables_cautions(t, err) != TF_OK)
        goto fail;
    return t;
fail:
    tf_table_free(t);
    return NULL;
}

static tf_status fill(tf_table *curves, tf_table *diffs, tf_table *declines, const tf_scenario_set *s,
                      const tf_projection_place *pl, tf_error *err)
{
    tf_status st = TF_OK;
    for (size_t i = 0; i < tf_scenario_set_n(s); i++) {
        const char *label = tf_scenario_set_scenario(s, i)->label;
        const tf_projection *p = tf_scenario_set_projection(s, i);
        for (size_t k = 0; k < tf_projection_n_thresholds(p); k++) {
            tf_threshold th = tf_projection_threshold(p, k);
            const char *kind = th.relative ? TF_THRESHOLD_FRACTION : TF_THRESHOLD_ANIMALS;
            for (size_t t = 0; t <= tf_projection_horizon(p); t++) {
                double row[N_OF(curve_columns) - 1] = {th.value, NAN, (double)t, tf_projection_tables_year(pl, t),
                                                       tf_projection_risk(p, k, t), tf_projection_risk_se(p, k, t),
                                                       NAN};
                for (size_t b = 0; b < N_OF(band_order); b++)
                    row[7 + b] = tf_projection_band(p, t, band_order[b]);
                size_t r = tf_table_n_rows(curves);
                if ((st = tf_projection_tables_row(curves, pl, label, row, N_OF(row), err)) != TF_OK ||
                    (st = tf_table_set_text(curves, r, FIRST + 2, kind, err)) != TF_OK ||
                    (st = tf_table_set_text(curves, r, FIRST + 7, pl->unit, err)) != TF_OK)
                    return st;
                double d, se;
                if ((st = tf_scenario_set_risk_difference(s, i, k, t, &d, &se, err)) != TF_OK)
                    return st;
                double drow[N_OF(difference_columns) - 1] = {th.value, NAN, (double)t, tf_projection_tables_year(pl, t),
                                                             tf_projection_risk(p, k, t), d, se};
                r = tf_table_n_rows(diffs);
                if ((st = tf_projection_tables_row(diffs, pl, label, drow, N_OF(drow), err)) != TF_OK ||
                    (st = tf_table_set_text(diffs, r, FIRST + 2, kind, err)) != TF_OK)
                    return st;
            }
        }
        for (size_t w = 0; w < tf_projection_n_windows(p); w++)
            for (size_t dd = 0; dd < tf_projection_n_declines(p); dd++) {
                double d, se;
                if ((st = tf_scenario_set_decline_difference(s, i, w, dd, &d, &se, err)) != TF_OK)
                    return st;
                double row[N_OF(decline_columns) - 1] = {(double)tf_projection_window(p, w),
                                                         tf_projection_decline(p, dd),
                                                         tf_projection_decline_prob(p, w, dd),
                                                         tf_projection_decline_se(p, w, dd), d, se};
                if ((st = tf_projection_tables_row(declines, pl, label, row, N_OF(row), err)) != TF_OK)
                    return st;
            }
    }
    return TF_OK;
}

tf_status tf_scenario_tables_build(const tf_scenario_set *s, const tf_projection_place *place,
                                   double status_quo_animals, size_t status_quo_years,
                                   tf_table *out[TF_SCENARIO_N_TABLES], tf_error *err)
{
    for (size_t i = 0; i < TF_SCENARIO_N_TABLES; i++)
        out[i] = NULL;
    char sq[200];
    tf_scenario_tables_status_quo(status_quo_animals, status_quo_years, sq, sizeof sq);
    tf_status st = TF_ERR_NOMEM;
    if (!(out[TF_SCENARIO_TABLE_CURVES] =
              new_table(TF_SCENARIO_CURVES_NAME, curve_columns, N_OF(curve_columns), s, sq, err)) ||
        !(out[TF_SCENARIO_TABLE_DIFFERENCES] =
              new_table(TF_SCENARIO_DIFFERENCES_NAME, difference_columns, N_OF(difference_columns), s, sq, err)) ||
        !(out[TF_SCENARIO_TABLE_DECLINES] =
              new_table(TF_SCENARIO_DECLINES_NAME, decline_columns, N_OF(decline_columns), s, sq, err)))
        goto fail;
    if ((st = fill(out[0], out[1], out[2], s, place, err)) != TF_OK)
        goto fail;
    return TF_OK;
fail:
    if (st == TF_OK)
        st = TF_ERR_NOMEM;
    tf_scenario_tables_free(out);
    return st;
}

void tf_scenario_tables_free(tf_table *tables[TF_SCENARIO_N_TABLES])
{
    for (size_t i = 0; i < TF_SCENARIO_N_TABLES; i++) {
        tf_table_free(tables[i]);
        tables[i] = NULL;
    }
}

tf_status tf_scenario_tables_summary(tf_table *t, const tf_scenario_set *s, const tf_safe_removal *safe,
                                     double status_quo_animals, size_t status_quo_years, tf_error *err)
{
    if (!status_quo_years && !s && !safe)
        return TF_OK;
    char text[600], label[96];
    tf_status st = tf_table_add_heading(t, "Management", err);
    if (st == TF_OK)
        st = tf_table_add_item_text(t, "Status quo",
                                    tf_scenario_tables_status_quo(status_quo_animals, status_quo_years, text,
                                                                  sizeof text),
                                    "what the usual projection assumes; scenarios' removals replace it", err);
    for (size_t i = 0; st == TF_OK && i < tf_scenario_set_n(s); i++) {
        const tf_scenario *sc = tf_scenario_set_scenario(s, i);
        snprintf(label, sizeof label, "Scenario '%s'", sc->label);
        st = tf_table_add_item_text(t, label, tf_scenario_describe(sc, text, sizeof text), NULL, err);
    }
    if (st == TF_OK && safe) {
        tf_scenario_tables_safe_note(safe, text, sizeof text);
        st = tf_table_add_item_number(t, tf_column_name(TF_C_SAFE_REMOVAL), safe->value,
                                      safe->ask.share ? TF_COL_PERCENT : TF_COL_NUMBER, text, err);
        if (st == TF_OK)
            st = tf_table_add_item_number(t, tf_column_name(TF_C_SAFE_REMOVAL_MCSE), safe->mcse,
                                          safe->ask.share ? TF_COL_PERCENT : TF_COL_NUMBER,
                                          safe->ask.share ? "a share of the population a year, as a fraction"
                                                          : "animals a year",
                                          err);
        if (st == TF_OK)
            st = tf_table_add_item_text(t, "Safe removal caution", tf_scenario_tables_safe_caution, NULL, err);
    }
    return st;
}

tf_status tf_scenario_tables_first_page(tf_table *t, const tf_scenario_set *s, const tf_safe_removal *safe,
                                        double status_quo_animals, size_t status_quo_years, int year0,
                                        tf_error *err)
{
    if (!s && !safe && !status_quo_years)
        return TF_OK;
    char text[600], note[400], th[48];
    tf_status st = TF_OK;
    const tf_projection *sq = tf_scenario_set_status_quo(s);
    if (!s) {
        st = tf_table_add_heading(t, "Removals", err);
        if (st == TF_OK)
            st = tf_table_add_item_text(t, "Status quo",
                                        tf_scenario_tables_status_quo(status_quo_animals, status_quo_years, text,
                                                                      sizeof text),
                                        "what the projection above assumes for every year ahead", err);
    }
    if (sq && tf_projection_n_thresholds(sq) > 0) {
        tf_threshold k0 = tf_projection_threshold(sq, 0);
        tf_project_threshold_label(&k0, th, sizeof th);
        snprintf(text, sizeof text,
                 "Management scenarios: chance of falling to the threshold %s%s at any time within the years", th,
                 k0.relative ? " of current" : "");
        st = tf_table_add_heading(t, text, err);
        if (st == TF_OK)
            st = tf_table_add_item_text(t, "Status quo",
                                        tf_scenario_tables_status_quo(status_quo_animals, status_quo_years, text,
                                                                      sizeof text),
                                        "the usual projection above; each scenario uses the same simulated futures",
                                        err);
        for (size_t i = 0; st == TF_OK && i < tf_scenario_set_n(s); i++) {
            const tf_scenario *sc = tf_scenario_set_scenario(s, i);
            const tf_projection *p = tf_scenario_set_projection(s, i);
            st = tf_table_add_item_text(t, sc->label, tf_scenario_describe(sc, text, sizeof text), NULL, err);
            for (size_t y = 0; st == TF_OK && y < TF_ANALYSIS_N_RISK_YEARS; y++) {
                size_t yr = tf_analysis_risk_years[y];
                if (yr > tf_projection_horizon(p))
                    break;
                double d, se;
                if ((st = tf_scenario_set_risk_difference(s, i, 0, yr, &d, &se, err)) != TF_OK)
                    break;
                snprintf(text, sizeof text, "  within %zu years", yr);
                snprintf(note, sizeof note, "by %d; status quo %.1f %%, difference %+.1f points (paired Monte Carlo "
                         "s.e. %.2g points)", year0 + (int)yr, 100 * tf_projection_risk(sq, 0, yr), 100 * d, 100 * se);
                st = tf_table_add_item_number(t, text, tf_projection_risk(p, 0, yr), TF_COL_PERCENT, note, err);
            }
        }
    }
    if (st == TF_OK && safe) {
        snprintf(text, sizeof text, "Largest safe removal: %s", tf_scenario_tables_safe_value(safe, note, sizeof note));
        st = tf_table_add_heading(t, text, err);
        if (st == TF_OK)
            st = tf_table_add_item_number(t, tf_column_name(TF_C_SAFE_REMOVAL), safe->value,
                                          safe->ask.share ? TF_COL_PERCENT : TF_COL_NUMBER,
                                          tf_scenario_tables_safe_note(safe, note, sizeof note), err);
        if (st == TF_OK && safe->exceeded_at_zero)
            st = tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err);
        if (st == TF_OK)
            st = tf_table_add_item_number(t, tf_column_name(TF_C_SAFE_REMOVAL_MCSE), safe->mcse,
                                          safe->ask.share ? TF_COL_PERCENT : TF_COL_NUMBER,
                                          "its Monte Carlo standard error: sd of the answers of 10 batches of runs / "
                                          "sqrt(10)",
                                          err);
        if (st == TF_OK)
            st = tf_table_add_item_text(t, "  caution", tf_scenario_tables_safe_caution, NULL, err);
    }
    return st;
}
