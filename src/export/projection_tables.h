/* A projection as export tables: abundance bands, quasi-extinction curves and decline
 * probabilities, with legends, display kinds and the projection cautions, so that the CSV files
 * and the workbook are written from the very same tables. */
#ifndef TF_PROJECTION_TABLES_H
#define TF_PROJECTION_TABLES_H

#include <limits.h>

#include "export/table.h"
#include "project/project.h"
#include "util/error.h"

/* The tables, in the order tf_projection_tables_build stores them. */
enum {
    TF_PROJECTION_TABLE_BANDS,     /* year,calendar_year,median,pct25,pct75,pct5,pct95 */
    TF_PROJECTION_TABLE_RISK,      /* year,calendar_year,threshold,probability,se */
    TF_PROJECTION_TABLE_DECLINES,  /* window,decline,probability,se */
    TF_PROJECTION_N_TABLES
};

/* Table names; tf_csv_file_name keeps them as they are, plus ".csv". */
#define TF_PROJECTION_BANDS_NAME "forecast_bands"
#define TF_PROJECTION_RISK_NAME "forecast_quasi_extinction"
#define TF_PROJECTION_DECLINES_NAME "forecast_declines"

/* year0 for "calendar year unknown": the calendar_year cells are then left empty. */
#define TF_PROJECTION_NO_YEAR INT_MIN

/* Builds the three tables of p into out[0 .. TF_PROJECTION_N_TABLES), indexed as above.
 * year counts years ahead (0 = the last survey year, calendar year year0). Bands have one row
 * per year 0..horizon; risk one row per threshold and year (thresholds in p's order, labelled
 * "50" or "20%"); declines one row per window and decline. Probabilities are
 * TF_COL_PROBABILITY, declines TF_COL_PERCENT (stored as fractions), calendar years TF_COL_YEAR,
 * years ahead and windows TF_COL_INTEGER; each column has a legend, and each table carries the
 * cautions of project/cautions.h as TF_NOTE_CAUTION notes after one TF_NOTE_INFO line on the
 * number of runs. Nothing is computed: every number is read from p. The caller owns the tables
 * (tf_projection_tables_free). On failure (TF_ERR_NOMEM) every out[i] is NULL. */
tf_status tf_projection_tables_build(const tf_projection *p, int year0, tf_table *out[TF_PROJECTION_N_TABLES],
                                     tf_error *err);

/* Frees the tables and sets the entries to NULL; accepts NULL entries. */
void tf_projection_tables_free(tf_table *tables[TF_PROJECTION_N_TABLES]);

#endif
