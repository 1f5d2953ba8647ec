/* A survey file: one or more populations read from CSV (libcsv; comma, semicolon or tab separated)
 * and validated. */
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
 * TF_ERR_PARSE / TF_ERR_RANGE / TF_ERR_INVALID for the contents (a count that is not a whole
 * number among them: see tf_survey_options.estimates). Rows of one population are
 * sorted by year; years between its first and last row that are missing, or have an empty / NA
 * count, are NAN in the series. */
tf_status tf_survey_read(const char *path, tf_survey **out, tf_error *err);

/* As tf_survey_read, for a survey already in memory: name is used in messages and as the path,
 * data (len bytes, need not be NUL-terminated) is borrowed for the call only. */
tf_status tf_survey_parse(const char *name, const char *data, size_t len, tf_survey **out, tf_error *err);

/* A batch of many populations reads as tf_survey_read does, except that a problem that belongs to
 * one population (a bad year, count or effort in one of its rows, a year given twice, too long a
 * span, too few surveyed years, only zeros) sets that population aside instead of failing the
 * file: the survey holds the clean populations, and tf_survey_rejected_at says which were set
 * aside and why. Problems that belong to no population (the header, the encoding, quoting, a row
 * with the wrong number of fields, a missing or unusable label) still fail the whole file, with
 * every message the strict reading gives. max_rows replaces TF_SURVEY_MAX_ROWS (0 = keep it);
 * the byte limit stays. A file whose every population is set aside still reads (TF_OK). */
tf_status tf_survey_read_batch(const char *path, size_t max_rows, tf_survey **out, tf_error *err);
tf_status tf_survey_parse_batch(const char *name, const char *data, size_t len, size_t max_rows, tf_survey **out,
                                tf_error *err);

/* How a survey is read. Zeroed, it is tf_survey_read: strict, every count a whole number. */
typedef struct {
    /* The count column holds estimates (indices, densities, corrected counts): values need not
     * be whole. Without it a count that is not a whole number is an error on its line. */
    int estimates;
    /* Read as tf_survey_read_batch: a population with a problem of its own is set aside. */
    int batch;
    size_t max_rows;    /* with batch: replaces TF_SURVEY_MAX_ROWS (0 = keep it) */
} tf_survey_options;

/* tf_survey_read / tf_survey_parse under the options o. */
tf_status tf_survey_read_with(const char *path, const tf_survey_options *o, tf_survey **out, tf_error *err);
tf_status tf_survey_parse_with(const char *name, const char *data, size_t len, const tf_survey_options *o,
                               tf_survey **out, tf_error *err);

/* Whether the survey was read with estimates allowed (tf_survey_options.estimates): then only
 * counting-error models of continuous amounts suit it, whatever its values. */
int tf_survey_estimates(const tf_survey *sv);

/* A population set aside by the batch reading: its label (owned by the survey), its place among
 * all populations of the file in order of first appearance, and its first problem in file order
 * (status, line, column, message and hint as tf_survey_read would report it; among the first
 * TF_ERROR_MAX problems of each row and of its group checks) with the number of problems it has
 * in all. */
typedef struct {
    char *label;
    size_t order;
    tf_status status;
    long line, column;
    size_t n_problems;
    char what[512];
    char hint[256];
} tf_survey_rejected;

size_t tf_survey_n_rejected(const tf_survey *sv);
/* NULL when i is out of range. */
const tf_survey_rejected *tf_survey_rejected_at(const tf_survey *sv, size_t i);
/* The place of series i among all populations of the file, set-aside ones included. */
size_t tf_survey_series_order(const tf_survey *sv, size_t i);

/* How many populations the file holds, those set aside by the batch reading and those left out
 * by tf_survey_keep included: what decides whether outputs are named by population. */
size_t tf_survey_n_in_file(const tf_survey *sv);

/* Keeps only the populations (good and set aside) whose label is among labels[0..n), in their
 * file order; the others are freed. Labels not in the survey are ignored (the caller checks). */
void tf_survey_keep(tf_survey *sv, const char *const *labels, size_t n);

/* Sets the counted fraction (tf_series_set_counted_fraction) of every series. */
tf_status tf_survey_set_counted_fraction(tf_survey *sv, double q, tf_error *err);

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
