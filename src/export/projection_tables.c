/* Export tables of a projection; they only hold what the projection computed. */
#include "export/projection_tables.h"

#include <math.h>
#include <stddef.h>

#include "project/cautions.h"

typedef struct {
    const char *header;
    const char *legend;
    tf_col_kind kind;
} column;

#define YEAR_COLUMNS                                                                                  \
    {"year", "Years after the last survey year (0 = that year)", TF_COL_INTEGER},                     \
    {"calendar_year", "Calendar year (empty when the survey's years are not known)", TF_COL_YEAR}
#define SE_COLUMN                                                                                     \
    {"se", "Monte Carlo standard error of the probability, sqrt(p (1 - p) / runs)", TF_COL_NUMBER}

static const column band_columns[] = {
    YEAR_COLUMNS,
    {"median", "Median abundance of the simulated futures (animals)", TF_COL_NUMBER},
    {"pct25", "25th percentile of the simulated abundance (animals)", TF_COL_NUMBER},
    {"pct75", "75th percentile of the simulated abundance (animals)", TF_COL_NUMBER},
    {"pct5", "5th percentile of the simulated abundance (animals)", TF_COL_NUMBER},
    {"pct95", "95th percentile of the simulated abundance (animals)", TF_COL_NUMBER},
};
/* The bands in the order of band_columns after the two year columns. */
static const tf_band band_order[] = {TF_BAND_MEDIAN, TF_BAND_P25, TF_BAND_P75, TF_BAND_P05, TF_BAND_P95};

enum { RISK_THRESHOLD_COL = 2 };
static const column risk_columns[] = {
    YEAR_COLUMNS,
    {"threshold", "Quasi-extinction threshold: animals, or a percentage of the current abundance (\"20%\")",
     TF_COL_TEXT},
    {"probability", "Share of simulated futures at or below the threshold in at least one year up to this one",
     TF_COL_PROBABILITY},
    SE_COLUMN,
};

static const column decline_columns[] = {
    {"window", "Years over which the decline is measured", TF_COL_INTEGER},
    {"decline", "Decline from the current abundance", TF_COL_PERCENT},
    {"probability", "Chance that the abundance after the window is at most (1 - decline) times the current one",
     TF_COL_PROBABILITY},
    SE_COLUMN,
};

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))
/* Cells per row of the widest table. */
#define MAX_COLUMNS N_OF(band_columns)

/* A table with its columns and notes but no rows yet; NULL on failure. */
static tf_table *new_table(const char *name, const column *cols, size_t n_cols, const tf_projection *p,
                           tf_error *err)
{
    tf_table *t = tf_table_new(name, err);
    if (!t)
        return NULL;
    for (size_t j = 0; j < n_cols; j++)
        if (tf_table_add_column(t, cols[j].header, cols[j].legend, cols[j].kind, NULL, err) != TF_OK)
            goto fail;
    if (tf_table_add_notef(t, TF_NOTE_INFO, err, "Projection of %zu simulated futures, %zu years ahead.",
                           tf_projection_n_runs(p), tf_projection_horizon(p)) != TF_OK)
        goto fail;
    for (size_t i = 0; i < tf_project_n_cautions(); i++)
        if (tf_table_add_note(t, TF_NOTE_CAUTION, tf_project_caution(i), err) != TF_OK)
            goto fail;
    return t;
fail:
    tf_table_free(t);
    return NULL;
}

static double calendar(int year0, size_t t)
{
    return year0 == TF_PROJECTION_NO_YEAR ? NAN : (double)year0 + (double)t;
}

static tf_status fill_bands(tf_table *tb, const tf_projection *p, int year0, tf_error *err)
{
    double row[MAX_COLUMNS];
    for (size_t t = 0; t <= tf_projection_horizon(p); t++) {
        row[0] = (double)t;
        row[1] = calendar(year0, t);
        for (size_t b = 0; b < N_OF(band_order); b++)
            row[2 + b] = tf_projection_band(p, t, band_order[b]);
        tf_status st = tf_table_add_row_numbers(tb, row, N_OF(band_columns), err);
        if (st != TF_OK)
            return st;
    }
    return TF_OK;
}

static tf_status fill_risk(tf_table *tb, const tf_projection *p, int year0, tf_error *err)
{
    double row[MAX_COLUMNS];
    for (size_t k = 0; k < tf_projection_n_thresholds(p); k++) {
        tf_threshold th = tf_projection_threshold(p, k);
        char label[48];
        tf_project_threshold_label(&th, label, sizeof label);
        for (size_t t = 0; t <= tf_projection_horizon(p); t++) {
            row[0] = (double)t;
            row[1] = calendar(year0, t);
            row[RISK_THRESHOLD_COL] = NAN;
            row[3] = tf_projection_risk(p, k, t);
            row[4] = tf_projection_risk_se(p, k, t);
            tf_status st = tf_table_add_row_numbers(tb, row, N_OF(risk_columns), err);
            if (st == TF_OK)
                st = tf_table_set_text(tb, tf_table_n_rows(tb) - 1, RISK_THRESHOLD_COL, label, err);
            if (st != TF_OK)
                return st;
        }
    }
    return TF_OK;
}

static tf_status fill_declines(tf_table *tb, const tf_projection *p, tf_error *err)
{
    double row[MAX_COLUMNS];
    for (size_t w = 0; w < tf_projection_n_windows(p); w++)
        for (size_t d = 0; d < tf_projection_n_declines(p); d++) {
            row[0] = (double)tf_projection_window(p, w);
            row[1] = tf_projection_decline(p, d);
            row[2] = tf_projection_decline_prob(p, w, d);
            row[3] = tf_projection_decline_se(p, w, d);
            tf_status st = tf_table_add_row_numbers(tb, row, N_OF(decline_columns), err);
            if (st != TF_OK)
                return st;
        }
    return TF_OK;
}

tf_status tf_projection_tables_build(const tf_projection *p, int year0, tf_table *out[TF_PROJECTION_N_TABLES],
                                     tf_error *err)
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
    if ((st = fill_bands(out[TF_PROJECTION_TABLE_BANDS], p, year0, err)) != TF_OK ||
        (st = fill_risk(out[TF_PROJECTION_TABLE_RISK], p, year0, err)) != TF_OK ||
        (st = fill_declines(out[TF_PROJECTION_TABLE_DECLINES], p, err)) != TF_OK)
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
