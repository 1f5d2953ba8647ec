/* A survey file: one or more populations read from CSV (libcsv) and validated. */
#ifndef TF_SURVEY_H
#define TF_SURVEY_H

#include <stddef.h>

#include "survey/series.h"
#include "util/error.h"

typedef struct tf_survey tf_survey;

/* The fewest surveyed years a population needs before a model is fitted to it. */
#define TF_SURVEY_MIN_SURVEYED 5

/* Reads and validates the survey CSV at path. On success stores a new survey in *out (free with
 * tf_survey_free) and returns TF_OK. On failure returns the first error's status, leaves *out NULL
 * and records every problem found (up to TF_ERROR_MAX) in err, each with file, line and column. */
tf_status tf_survey_read(const char *path, tf_survey **out, tf_error *err);

/* Accepts NULL. */
void tf_survey_free(tf_survey *sv);

const char *tf_survey_path(const tf_survey *sv);
size_t tf_survey_n_series(const tf_survey *sv);
/* Populations in the order their labels first appear in the file. Borrowed from sv. */
const tf_series *tf_survey_series(const tf_survey *sv, size_t i);
/* NULL when no population has that label. */
const tf_series *tf_survey_find(const tf_survey *sv, const char *label);

#endif
