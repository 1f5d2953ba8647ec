/* The vocabulary of every output table: one entry per column name, with the heading the workbook
 * shows, a one-line legend and a display kind. Every table builder takes its columns from here,
 * so the same quantity has the same name, scale and words in every command and every file.
 *
 * The convention (docs/tables.md): names are snake_case ASCII; `population` comes first in every
 * table, then `model` where it applies; shares, probabilities and changes are fractions (the
 * workbook shows them as percentages); quantiles are `lower_95`, `upper_95`, `lower_50`,
 * `upper_50`, `median`; a Monte Carlo standard error is `<quantity>_mcse`; `year` is a calendar
 * year and `years_ahead` counts from the last survey year; a threshold is a number with its
 * `threshold_kind`. */
#ifndef TF_COLUMNS_H
#define TF_COLUMNS_H

#include <stddef.h>

#include "export/table.h"
#include "util/error.h"

typedef enum {
    TF_C_POPULATION,
    TF_C_MODEL,
    TF_C_STATUS,
    TF_C_PERIOD,
    TF_C_YEAR,
    TF_C_YEARS_AHEAD,
    TF_C_FIRST_YEAR,
    TF_C_LAST_YEAR,
    TF_C_YEARS_SURVEYED,
    TF_C_COUNT,
    TF_C_EFFORT,
    TF_C_COUNT_PER_EFFORT,
    TF_C_UNIT,
    TF_C_MEAN,
    TF_C_SD,
    TF_C_MEDIAN,
    TF_C_LOWER_50,
    TF_C_UPPER_50,
    TF_C_LOWER_95,
    TF_C_UPPER_95,
    TF_C_MEAN_MCSE,
    TF_C_R_HAT,
    TF_C_BULK_ESS,
    TF_C_TAIL_ESS,
    TF_C_MAX_R_HAT,
    TF_C_MIN_BULK_ESS,
    TF_C_MIN_TAIL_ESS,
    TF_C_MIN_ESS,
    TF_C_PARAMETER,
    TF_C_PRIOR,
    TF_C_CHAIN,
    TF_C_DRAW,
    TF_C_LOG_LIKELIHOOD,
    TF_C_LAST_ABUNDANCE,
    TF_C_MODEL_PROB,
    TF_C_P_DECLINE,
    TF_C_CHAINS,
    TF_C_WARMUP,
    TF_C_ITERATIONS,
    TF_C_KEPT_DRAWS,
    TF_C_THIN,
    TF_C_CONVERGED,
    TF_C_PARTICLES,
    TF_C_LOGLIK_SD,
    TF_C_ACCEPTANCE,
    TF_C_MIN_ACCEPTANCE,
    TF_C_INVALID,
    TF_C_METHOD,
    TF_C_RHO,
    TF_C_SCREENED,
    TF_C_SEED,
    TF_C_PROPOSAL,
    TF_C_PARETO_K,
    TF_C_SECONDS,
    TF_C_CHECKS,
    TF_C_THRESHOLD,
    TF_C_THRESHOLD_KIND,
    TF_C_PROBABILITY,
    TF_C_PROBABILITY_MCSE,
    TF_C_WINDOW_YEARS,
    TF_C_DECLINE,
    TF_C_ABUNDANCE,
    TF_C_ABUNDANCE_LOWER_95,
    TF_C_ABUNDANCE_UPPER_95,
    TF_C_CHANGE,
    TF_C_CHANGE_LOWER_95,
    TF_C_CHANGE_UPPER_95,
    TF_C_RECENT_FIRST_YEAR,
    TF_C_RECENT_CHANGE,
    TF_C_RECENT_CHANGE_LOWER_95,
    TF_C_RECENT_CHANGE_UPPER_95,
    TF_C_RECENT_P_DECLINE,
    TF_C_BEST_GROWTH_MODEL,
    TF_C_BEST_GROWTH_PROB,
    TF_C_BEST_MODEL,
    TF_C_BEST_MODEL_PROB,
    TF_C_REASON,
    TF_C_FILE,
    TF_C_SHEET,
    TF_C_ABOUT,
    TF_C_ALTERNATIVE,
    TF_C_LOG_ML,
    TF_C_LOG_ML_MCSE,
    TF_C_MODEL_PROB_MCSE,
    TF_C_DRAWS_PARETO_K,
    TF_C_NOTE,
    TF_C_SCENARIO,
    TF_C_DIFFERENCE,
    TF_C_DIFFERENCE_MCSE,
    TF_C_SAFE_REMOVAL,
    TF_C_SAFE_REMOVAL_MCSE,
    TF_C_COUNT_OF_COLUMNS
} tf_column_id;

/* One column of the vocabulary. */
typedef struct {
    const char *name;     /* the CSV header, ^[a-z][a-z0-9_]*$ */
    const char *label;    /* the workbook's heading */
    const char *legend;   /* one line: what it is and its unit */
    tf_col_kind kind;
} tf_column;

/* The entry of id (asserted in range). */
const tf_column *tf_column_of(tf_column_id id);
/* Its CSV name: the string the batch and the tests look columns up by. */
const char *tf_column_name(tf_column_id id);

/* Appends column id to t with its name, label, legend and kind; legend (may be NULL) replaces
 * the vocabulary's legend where a table says more (e.g. which quantity a median is of). The
 * new column's index goes to *col when col is not NULL. Errors as tf_table_add_column. */
tf_status tf_columns_add(tf_table *t, tf_column_id id, const char *legend, size_t *col, tf_error *err);

/* The same with another display kind than the vocabulary's (whole counts as integers, a change
 * shown as a percentage). */
tf_status tf_columns_add_as(tf_table *t, tf_column_id id, const char *legend, tf_col_kind kind, size_t *col,
                            tf_error *err);

/* A column outside the vocabulary (a model parameter, a risk per threshold and horizon): name
 * must match ^[a-z][a-z0-9_]*$ (TF_ERR_INVALID otherwise); label and legend may be NULL. */
tf_status tf_columns_add_other(tf_table *t, const char *name, const char *label, const char *legend, tf_col_kind kind,
                               size_t *col, tf_error *err);

/* Whether name is a valid column name, ^[a-z][a-z0-9_]*$. */
int tf_columns_valid_name(const char *name);

/* The column name of a model parameter: its name in lower case ("K" -> "k"). Writes at most size
 * bytes. */
void tf_columns_parameter_name(const char *param, char *buf, size_t size);

/* What a unit column holds. */
#define TF_UNIT_ANIMALS "animals"
/* Counts at effort 1 that hold only a share of the animals present (--counted-fraction below 1):
 * animals = count units / that share. */
#define TF_UNIT_COUNT "count units"
#define TF_UNIT_PER_EFFORT "count units per unit effort"
/* ... and its opening when the survey names its unit of effort: "count units per trap-night". */
#define TF_UNIT_PER_NAMED "count units per "
/* What a threshold_kind column holds. */
#define TF_THRESHOLD_ANIMALS "animals"
#define TF_THRESHOLD_FRACTION "fraction_of_current"

#endif
