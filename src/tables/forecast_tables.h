/* The tables of one population's forecast: the projection's tables (projection, risk, declines),
 * each with the cautions of this forecast, and a key-value summary of what was projected (the
 * source: given values, one fitted model or the model average; the model probabilities or the
 * draws; the settings; the median time to each threshold; every caution). Built from the
 * forecast's result alone. */
#ifndef TF_FORECAST_TABLES_H
#define TF_FORECAST_TABLES_H

#include <stddef.h>

#include "analysis/forecast.h"
#include "export/table.h"
#include "tables/projection_tables.h"
#include "util/error.h"

/* The tables, in the order tf_forecast_tables_build stores them: the projection tables
 * (TF_PROJECTION_TABLE_*), then the summary. */
#define TF_FORECAST_TABLE_SUMMARY TF_PROJECTION_N_TABLES
#define TF_FORECAST_N_TABLES (TF_PROJECTION_N_TABLES + 1)

/* Room for the cautions of one forecast: the general ones and up to three of its own. */
#define TF_FORECAST_MAX_CAUTIONS 8

/* The cautions of forecast f: the general ones (project/cautions.h), then what this source of
 * futures leaves out (given values, a start set by hand), then the convergence caution when p
 * (NULL: every population of f) needs it. Stores at most TF_FORECAST_MAX_CAUTIONS strings
 * (static) in out; returns their number. */
size_t tf_forecast_tables_cautions(const tf_forecast *f, const tf_forecast_pop *p, const char **out);

/* Builds the tables of population p of f into out (the caller frees them, also after a failure).
 * population is its label in every table (the survey's name when it has none; "" without a
 * survey); survey_path (may be NULL) is named in the summary. TF_ERR_NOMEM on failure. */
tf_status tf_forecast_tables_build(const tf_forecast *f, const tf_forecast_pop *p, const char *population,
                                   const char *survey_path, tf_table *out[TF_FORECAST_N_TABLES], tf_error *err);

#endif
