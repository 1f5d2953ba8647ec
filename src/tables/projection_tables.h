/* A projection as tables: abundance bands, quasi-extinction curves and decline probabilities,
 * with legends, display kinds and the projection cautions, so that the CSV files and the workbook
 * are written from the very same tables. Each starts with `population` and `model`. */
#ifndef TF_PROJECTION_TABLES_H
#define TF_PROJECTION_TABLES_H

#include "export/table.h"
#include "project/project.h"
#include "util/error.h"

/* The tables, in the order tf_projection_tables_build stores them. */
enum {
    TF_PROJECTION_TABLE_BANDS,     /* projection: population,model,years_ahead,year,unit,median,lower_50,... */
    TF_PROJECTION_TABLE_RISK,      /* risk: population,model,threshold,threshold_kind,years_ahead,year,probability,... */
    TF_PROJECTION_TABLE_DECLINES,  /* declines: population,model,window_years,decline,probability,... */
    TF_PROJECTION_N_TABLES
};

/* Table names: the file stems. */
#define TF_PROJECTION_BANDS_NAME "projection"
#define TF_PROJECTION_RISK_NAME "risk"
#define TF_PROJECTION_DECLINES_NAME "declines"

/* Whose projection it is. Strings are borrowed. */
typedef struct {
    const char *population;   /* the population's label */
    const char *model;        /* the model's name, "average", or "fixed" for given parameters */
    const char *unit;         /* TF_UNIT_ANIMALS or TF_UNIT_PER_EFFORT (tables/columns.h) */
    int year0;                /* calendar year of years_ahead 0, or TF_PROJECTION_NO_YEAR */
} tf_projection_place;

/* Builds the three tables of p into out[0 .. TF_PROJECTION_N_TABLES), indexed as above.
 * years_ahead counts from the last survey year (0 = that year, calendar year place->year0). Bands
 * have one row per year 0..horizon (median, the central 50 % and 95 % intervals); risk one row
 * per threshold and year (thresholds in p's order, each a number with its threshold_kind); declines
 * one row per window and decline (a fraction). Every column comes from the vocabulary
 * (tables/columns.h); each table carries the cautions of project/cautions.h as TF_NOTE_CAUTION
 * notes after one TF_NOTE_INFO line on the number of runs. Nothing is computed: every number is
 * read from p. The caller owns the tables (tf_projection_tables_free). On failure (TF_ERR_NOMEM)
 * every out[i] is NULL. */
tf_status tf_projection_tables_build(const tf_projection *p, const tf_projection_place *place,
                                     tf_table *out[TF_PROJECTION_N_TABLES], tf_error *err);

/* What every projection table shares, for the tables built on a projection elsewhere
 * (tables/scenario_tables.c). The calendar year of years_ahead t (NAN when place->year0 is
 * TF_PROJECTION_NO_YEAR). */
double tf_projection_tables_year(const tf_projection_place *place, size_t t);
/* Appends a row: population and model from place, then label when not NULL (a scenario's), then
 * the numbers v[0 .. n) in the cells after them (NAN = blank). */
tf_status tf_projection_tables_row(tf_table *t, const tf_projection_place *place, const char *label, const double *v,
                                   size_t n, tf_error *err);
/* Adds the projection cautions (project/cautions.h) as TF_NOTE_CAUTION notes. */
tf_status tf_projection_tables_cautions(tf_table *t, tf_error *err);

/* Frees the tables and sets the entries to NULL; accepts NULL entries. */
void tf_projection_tables_free(tf_table *tables[TF_PROJECTION_N_TABLES]);

#endif
