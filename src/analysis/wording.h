/* The plain sentences that say what an analysis found, shared by the report's first page and
 * the lines analyze prints, so that both always say the same thing. */
#ifndef TF_WORDING_H
#define TF_WORDING_H

#include <stddef.h>

#include "analysis/analysis.h"
#include "project/project.h"

/* Writes a percentage for reading: v in percent, one decimal below 10 in size, none above, no
 * trailing ".0" ("-2", "-0.5", "12"). buf of size >= 32. Returns buf. */
char *tf_wording_percent(double v, char *buf, size_t size);

/* Writes a probability for reading: "less than 1 %", "more than 99 %", else "about N %" with N
 * the nearest whole percent. buf of size >= 32. Returns buf. */
char *tf_wording_chance(double p, char *buf, size_t size);

/* The sentence on the trend over its period ("The counts point to a decline of about 2 % a year
 * (95 % interval -4 % to -0.5 %) over 1996-2025."). */
void tf_wording_trend(const tf_analysis_trend *t, char *buf, size_t size);

/* The sentence on the recent trend ("Over the last 10 years, 2016-2025, no clear trend: about
 * -0.5 % a year, 95 % interval -2 % to 1 %."); "" when its period is the whole survey. */
void tf_wording_recent(const tf_analysis_trend *whole, const tf_analysis_trend *recent, char *buf, size_t size);

/* The threshold for reading: "100 animals" or "20 % of the current abundance". unit names what
 * abundances are in (tables/fit_tables.h, tf_tables_unit: "count units per trap-night"...); NULL
 * is "animals". */
void tf_wording_threshold(const tf_threshold *t, const char *unit, char *buf, size_t size);

/* The sentence on the chance of falling below threshold t within years years ("Averaging the
 * models by their support, the chance of falling below 100 animals within 20 years is about
 * 12 %."). */
void tf_wording_risk(const tf_threshold *t, const char *unit, size_t years, double p, char *buf, size_t size);

/* The sentence on the prior sensitivity of population p ("With priors half or twice as wide:
 * best model's probability 62 % to 81 %; 20-year risk (below 50 % of the current abundance) 1.6 %
 * to 4.6 % (prior-sensitivity sheet)."), over every row of its sensitivity
 * (the user's folders of priors included, and then named); "" when it was not made. When another
 * model is the best under some set of priors, caution (size > 0, may be NULL) receives a sentence
 * naming the first such set and model, else "". */
void tf_wording_prior_sensitivity(const tf_analysis_pop *p, const char *unit, char *buf, size_t size, char *caution,
                                  size_t caution_size);

#endif
