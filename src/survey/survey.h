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
 * tf_survey_free) and returns TF_OK. On failure returns the first error's status, leaves *out NULL
 * and records every problem found (up to TF_ERROR_MAX) in err, each with file, line and column. */
tf_status tf_survey_read(const char *path, tf_survey **out, tf_error *err);

/* As tf_survey_read, for a survey already in memory: name is used in messages and as the path,
 * data (len bytes, need not be NUL-terminated) is borrowed for the call only. */
tf_status tf_survey_parse(const char *name, const char *data, size_t len, tf_survey **out, tf_error *err);

/* Accepts NULL. */
void tf_survey_free(tf_survey *sv);

const char *tf_survey_path(const tf_survey *sv);
size_t tf_survey_n_series(const tf_survey *sv);
/* Populations in the order their labels first appear in the file. Borrowed from sv. */
const tf_series *tf_survey_series(const tf_survey *sv, size_t i);
/* NULL when no population has that label. */
const tf_series *tf_survey_find(const tf_survey *sv, const char *label);

#endif
