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

/* Longest name of the survey's unit of effort, in characters (UTF-8 code points). */
#define TF_SERIES_EFFORT_NAME_MAX 32

/* TF_OK when name can name the unit of effort ("trap-night", "hour of watching"): 1 to
 * TF_SERIES_EFFORT_NAME_MAX characters of valid UTF-8, no control character, no comma (it is
 * read inside tables and headers) and no blank at either end. Otherwise TF_ERR_USAGE with what
 * is wrong and a hint. */
tf_status tf_series_check_effort_name(const char *name, tf_error *err);

/* Names the unit of effort of s (checked with tf_series_check_effort_name first; NULL or ""
 * clears it). Copies name. TF_ERR_NOMEM leaves the old name. */
tf_status tf_series_set_effort_name(tf_series *s, const char *name, tf_error *err);

/* The unit of effort's name, "" when the survey did not name it; never NULL. */
const char *tf_series_effort_name(const tf_series *s);
int tf_series_first_year(const tf_series *s);
size_t tf_series_n_years(const tf_series *s);          /* span, first to last year listed */
const double *tf_series_counts(const tf_series *s);    /* n_years; NAN = not surveyed */
const double *tf_series_effort(const tf_series *s);    /* n_years; 1 where not surveyed */
long tf_series_source_line(const tf_series *s, size_t i); /* input line of year i, 0 = none */
size_t tf_series_n_surveyed(const tf_series *s);
size_t tf_series_n_zero(const tf_series *s);
/* Index of the first surveyed count that is not a whole number, or n_years when all are. */
size_t tf_series_first_fractional(const tf_series *s);

/* Animals taken out (hunt, cull, capture) and put in (release, translocation) after each year's
 * count: the growth step from year i to i + 1 acts on the number left (tf_series_take). Copies
 * n_years values of each (NULL = none; NAN = none that year); each must be finite and >= 0, else
 * TF_ERR_RANGE naming the year and its input line, and s is unchanged. */
tf_status tf_series_set_actions(tf_series *s, const double *removed, const double *added, tf_error *err);
/* Whether any year has a removal or a release. */
int tf_series_has_actions(const tf_series *s);
/* Animals removed (added) after the count of year i; 0 when none or i >= n_years. */
double tf_series_removed(const tf_series *s, size_t i);
double tf_series_added(const tf_series *s, size_t i);

/* The share of the animals present that a count at effort 1 includes, in (0, 1]: the link between
 * animals removed and the abundance in count units. 1 (the default) means the counts are
 * censuses up to counting error. Set by the commands from --counted-fraction; values outside
 * (0, 1] are TF_ERR_RANGE and leave s unchanged. */
tf_status tf_series_set_counted_fraction(tf_series *s, double q, tf_error *err);
double tf_series_counted_fraction(const tf_series *s);

/* The net take after the count of year i in count units at effort 1, what the growth step
 * subtracts from the latent abundance exp(x): q (removed - added). 0 for a year without
 * removals or releases (and for i >= n_years). */
double tf_series_take(const tf_series *s, size_t i);

/* Counts far from their neighbours, flagged for a look (never dropped). A surveyed year is flagged
 * when its log(count / effort + 0.5) lies more than log(TF_SERIES_OUTLIER_FACTOR) from the median
 * of the same value over its neighbours: up to TF_SERIES_OUTLIER_WINDOW surveyed years on each
 * side, at least TF_SERIES_OUTLIER_MIN_NEIGHBOURS in all. This is the moving-median (Hampel)
 * identifier (Hampel 1974, J. Amer. Statist. Assoc. 69:383-393; Pearson 2002, IEEE Trans. Control
 * Syst. Technol. 10:55-63) with a fixed factor in place of its MAD scale, which is too small to
 * use in windows of a few counts; the factor 4 and the window are common practice, no source: a
 * typed extra zero (a factor 10) is flagged, a steady decline of even 50 % a year is not. The
 * 0.5 keeps zero counts usable, as in the crude trend. A count is also left alone when it lies
 * within 3 Poisson standard deviations, 3 sqrt(max(count, median)), of the median (the
 * median scaled by its year's effort), so that small counts are not flagged for sampling noise:
 * 0 among counts of 4 is not an outlier. */
#define TF_SERIES_OUTLIER_FACTOR 4.0
#define TF_SERIES_OUTLIER_WINDOW 3
#define TF_SERIES_OUTLIER_MIN_NEIGHBOURS 3

typedef struct {
    size_t index;       /* year index in the series */
    double count;       /* the count */
    double median;      /* the median count / effort of its neighbours, times its effort */
    double factor;      /* how many times above (> 1) or below (< 1) that median */
} tf_series_outlier;

/* Writes up to max flagged years of s, in year order, into out; returns how many there are in
 * all (may exceed max). */
size_t tf_series_outliers(const tf_series *s, tf_series_outlier *out, size_t max);

/* One sentence on outlier o of series s, for messages and the report: "population 'x', year
 * 2005: count 30700 is 10.0 times the median of the neighbouring years (3070)". */
void tf_series_outlier_text(const tf_series *s, const tf_series_outlier *o, char *buf, size_t size);

#endif
