/* One population's annual counts: a run of consecutive years, each surveyed (count, effort) or not. */
#ifndef TF_SERIES_H
#define TF_SERIES_H

#include <stddef.h>

#include "util/error.h"

typedef struct tf_series tf_series;

/* Builds a series of n_years consecutive years from first_year. counts[i] is NAN for a year not
 * surveyed; effort may be NULL (all 1) and is ignored where the count is NAN. Copies everything.
 * label may be NULL or "" for an unnamed population. source_lines may be NULL (then 0 = unknown).
 * Returns NULL and fills err when out of memory or when a value is unusable (effort <= 0, a
 * negative or non-finite count). The caller frees with tf_series_free. */
tf_series *tf_series_new(const char *label, int first_year, size_t n_years, const double *counts,
                         const double *effort, const long *source_lines, tf_error *err);

/* Accepts NULL. */
void tf_series_free(tf_series *s);

const char *tf_series_label(const tf_series *s);       /* never NULL; "" = unnamed */
int tf_series_first_year(const tf_series *s);
size_t tf_series_n_years(const tf_series *s);          /* span, first to last year listed */
const double *tf_series_counts(const tf_series *s);    /* n_years; NAN = not surveyed */
const double *tf_series_effort(const tf_series *s);    /* n_years; 1 where not surveyed */
long tf_series_source_line(const tf_series *s, size_t i); /* input line of year i, 0 = none */
size_t tf_series_n_surveyed(const tf_series *s);
size_t tf_series_n_zero(const tf_series *s);
/* Index of the first surveyed count that is not a whole number, or n_years when all are. */
size_t tf_series_first_fractional(const tf_series *s);

#endif
