/* A survey file: one or more populations read from CSV (libcsv) and validated. */
#ifndef TF_SURVEY_H
#define TF_SURVEY_H

#include <stddef.h>

#include "survey/series.h"
#include "util/error.h"

typedef struct tf_survey tf_survey;

/* The fewest surveyed years a population needs before a model is fitted to it. */
#define TF_SURVEY_MIN_SURVEYED 5

/* Sanity limits on what the importer accepts (common practice, no source: they only catch typing
 * errors and hostile input, no real count survey comes near them). */
#define TF_SURVEY_YEAR_MIN 1700
#define TF_SURVEY_YEAR_MAX 2200
#define TF_SURVEY_MAX_SPAN 500          /* years from first to last row of one population */
#define TF_SURVEY_MAX_COUNT 1e9         /* larger counts are typing errors or junk */
#define TF_SURVEY_MAX_LABEL 100         /* bytes in a population label */
#define TF_SURVEY_MAX_ROWS 100000       /* data rows in one file */
#define TF_SURVEY_MAX_BYTES (32L << 20) /* size of one file */

/* Reads and validates the survey CSV at path. On success stores a new survey in *out (free with
 * tf_survey_free) and returns TF_OK. On failure returns the status of the first problem in file
 * order, leaves *out NULL and appends every problem found to err (which may be NULL), in line
 * order, each with the file, the line, the field number where one applies, and a hint; messages
 * beyond TF_ERROR_MAX are counted in err->n_dropped. TF_ERR_IO (with the system's reason) when
 * the file cannot be opened or read, TF_ERR_RANGE when it is larger than TF_SURVEY_MAX_BYTES,
 * TF_ERR_NOMEM when memory runs out,
 * TF_ERR_PARSE / TF_ERR_RANGE / TF_ERR_INVALID for the contents. Rows of one population are
 * sorted by year; years between its first and last row that are missing, or have an empty / NA
 * count, are NAN in the series. */
tf_status tf_survey_read(const char *path, tf_survey **out, tf_error *err);

/* As tf_survey_read, for a survey already in memory: name is used in messages and as the path,
 * data (len bytes, need not be NUL-terminated) is borrowed for the call only. */
tf_status tf_survey_parse(const char *name, const char *data, size_t len, tf_survey **out, tf_error *err);

/* Accepts NULL. */
void tf_survey_free(tf_survey *sv);

const char *tf_survey_path(const tf_survey *sv);
size_t tf_survey_n_series(const tf_survey *sv);
/* Populations in the order their labels first appear in the file; NULL when i is out of range.
 * Borrowed from sv. */
const tf_series *tf_survey_series(const tf_survey *sv, size_t i);
/* NULL when no population has that label. */
const tf_series *tf_survey_find(const tf_survey *sv, const char *label);

#endif
