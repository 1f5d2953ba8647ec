/* Tables of a projection; they only hold what the projection computed. */
#include "tables/projection_tables.h"

#include <math.h>
#include <stddef.h>

#include "project/cautions.h"
#include "tables/columns.h"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))

/* Columns after population and model; legend NULL = the vocabulary's. */
typedef struct {
    tf_column_id id;
    const char *legend;
} column;

static const column band_columns[] = {
    {TF_C_YEARS_AHEAD, NULL},
    {TF_C_YEAR, "calendar year (blank when the survey's years are not known)"},
    {TF_C_UNIT, NULL},
    {TF_C_MEDIAN, "median abundance of the simulated futures"},
    {TF_C_LOWER_50, "25 % quantile of the simulated abundance"},
    {TF_C_UPPER_50, "75 % quantile of the simulated abundance"},
    {TF_C_LOWER_95, "2.5 % quantile of the simulated abundance"},
    {TF_C_UPPER_95, "97.5 % quantile of the simulated abundance"},
};
/* The bands in the order of band_columns after years_ahead, year and unit. */
static const tf_band band_order[] = {TF_BAND_MEDIAN, TF_BAND_P25, TF_BAND_P75, TF_BAND_P025, TF_BAND_P975};
#define BAND_FIRST 3

static const column risk_columns[] = {
    {TF_C_THRESHOLD, NULL},
    {TF_C_THRESHOLD_KIND, NULL},
    {TF_C_YEARS_AHEAD, NULL},
    {TF_C_YEAR, "calendar year (blank when the survey's years are not known)"},
    {TF_C_PROBABILITY, "share of simulated futures at or below the threshold in at least one year up to this one"},
    {TF_C_PROBABILITY_MCSE, "Monte Carlo standard error of the probability, sqrt(p (1 - p) / runs)"},
};

static const column decline_columns[] = {
    {TF_C_WINDOW_YEARS, NULL},
    {TF_C_DECLINE, "decline from the current abundance, a fraction"},
    {TF_C_PROBABILITY, "chance that the abundance after the window is at most (1 - decline) times the current one"},
    {TF_C_PROBABILITY_MCSE, "Monte Carlo standard error of the probability, sqrt(p (1 - p) / runs)"},
};

/* population and model come first: cells 0 and 1. */
#define FIRST 2

/* A table with its columns and notes but no rows yet; NULL on failure. */
static tf_table *new_table(const char *name, const column *cols, size_t n_cols, const tf_projection *p,
                           tf_error *err)
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
    if (tf_table_add_notef(t, TF_NOTE_INFO, err, "Projection of %zu simulated futures, %zu years ahead.",
                           tf_projection_n_runs(p), tf_projection_horizon(p)) != TF_OK)
        goto fail;
    if (tf_projection_tables_cautions(t, err) != TF_OK)
        goto fail;
    return t;
fail:
    tf_table_free(t);
    return NULL;
}

tf_status tf_projection_tables_cautions(tf_table *t, tf_error *err)
{
    for (size_t i = 0; i < tf_project_n_cautions(); i++) {
        tf_status st = tf_table_add_note(t, TF_NOTE_CAUTION, tf_project_caution(i), err);
        if (st != TF_OK)
            return st;
    }
    return TF_OK;
}

double tf_projection_tables_year(const tf_projection_place *pl, size_t t)
{
    return pl->year0 == TF_PROJECTION_NO_YEAR ? NAN : (double)pl->year0 + (double)t;
}

tf_status tf_projection_tables_row(tf_table *tb, const tf_projection_place *pl, const char *label, const double *v,
                                   size_t n, tf_error *err)
{
    size_t row, first = FIRST + (label != NULL);
    tf_status st = tf_table_add_row(tb, &row, err);
    if (st == TF_OK)
        st = tf_table_set_text(tb, row, 0, pl->population, err);
    if (st == TF_OK)
        st = tf_table_set_text(tb, row, 1, pl->model, err);
    if (st == TF_OK && label)
        st = tf_table_set_text(tb, row, FIRST, label, err);
    for (size_t k = 0; st == TF_OK && k < n; k++)
        if (!isnan(v[k]))
            tf_table_set_number(tb, row, first + k, v[k]);
    return st;
}

static tf_status fill_bands(tf_table *tb, const tf_projection *p, const tf_projection_place *pl, tf_error *err)
{
    double row[N_OF(band_columns)];
    for (size_t t = 0; t <= tf_projection_horizon(p); t++) {
        row[0] = (double)t;
        row[1] = tf_projection_tables_year(pl, t);
        row[2] = NAN;
        for (size_t b = 0; b < N_OF(band_order); b++)
            row[BAND_FIRST + b] = tf_projection_band(p, t, band_order[b]);
        tf_status st = tf_projection_tables_row(tb, pl, NULL, row, N_OF(row), err);
        if (st == TF_OK)
            st = tf_table_set_text(tb, tf_table_n_rows(tb) - 1, FIRST + 2, pl->unit, err);
        if (st != TF_OK)
            return st;
    }
    return TF_OK;
}

static tf_status fill_risk(tf_table *tb, const tf_projection *p, const tf_projection_place *pl, tf_error *err)
{
    double row[N_OF(risk_columns)];
    for (size_t k = 0; k < tf_projection_n_thresholds(p); k++) {
        tf_threshold th = tf_projection_threshold(p, k);
        for (size_t t = 0; t <= tf_projection_horizon(p); t++) {
            row[0] = th.value;
            row[1] = NAN;
            row[2] = (double)t;
            row[3] = tf_projection_tables_year(pl, t);
            row[4] = tf_projection_risk(p, k, t);
            row[5] = tf_projection_risk_se(p, k, t);
            tf_status st = tf_projection_tables_row(tb, pl, NULL, row, N_OF(row), err);
            if (st == TF_OK)
                st = tf_table_set_text(tb, tf_table_n_rows(tb) - 1, FIRST + 1,
                                       th.relative ? TF_THRESHOLD_FRACTION : TF_THRESHOLD_ANIMALS, err);
            if (st != TF_OK)
                return st;
        }
    }
    return TF_OK;
}

static tf_status fill_declines(tf_table *tb, const tf_projection *p, const tf_projection_place *pl, tf_error *err)
{
    double row[N_OF(decline_columns)];
    for (size_t w = 0; w < tf_projection_n_windows(p); w++)
        for (size_t d = 0; d < tf_projection_n_declines(p); d++) {
            row[0] = (double)tf_projection_window(p, w);
            row[1] = tf_projection_decline(p, d);
            row[2] = tf_projection_decline_prob(p, w, d);
            row[3] = tf_projection_decline_se(p, w, d);
            tf_status st = tf_projection_tables_row(tb, pl, NULL, row, N_OF(row), err);
            if (st != TF_OK)
                return st;
        }
    return TF_OK;
}

tf_status tf_projection_tables_build(const tf_projection *p, const tf_projection_place *place,
                                     tf_table *out[TF_PROJECTION_N_TABLES], tf_error *err)
{
    for (size_t i = 0; i < TF_PROJECTION_N_TABLES; i++)
        out[i] = NULL;
    tf_status st = TF_ERR_NOMEM;
    if (!(out[TF_PROJECTION_TABLE_BANDS] =
              new_table(TF_PROJECTION_BANDS_NAME, band_columns, N_OF(band_columns), p, err)) ||
        !(out[TF_PROJECTION_TABLE_RISK] =
              new_table(TF_PROJECTION_RISK_NAME, risk_columns, N_OF(risk_columns), p, err)) ||
        !(out[TF_PROJECTION_TABLE_DECLINES] =
              new_table(TF_PROJECTION_DECLINES_NAME, decline_columns, N_OF(decline_columns), p, err)))
        goto fail;
    if ((st = fill_bands(out[TF_PROJECTION_TABLE_BANDS], p, place, err)) != TF_OK ||
        (st = fill_risk(out[TF_PROJECTION_TABLE_RISK], p, place, err)) != TF_OK ||
        (st = fill_declines(out[TF_PROJECTION_TABLE_DECLINES], p, place, err)) != TF_OK)
        goto fail;
    return TF_OK;
fail:
    tf_projection_tables_free(out);
    return st;
}

void tf_projection_tables_free(tf_table *tables[TF_PROJECTION_N_TABLES])
{
    for (size_t i = 0; i < TF_PROJECTION_N_TABLES; i++) {
        tf_table_free(tables[i]);
        tables[i] = NULL;
    }
}
