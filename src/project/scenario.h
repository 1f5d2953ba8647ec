/* Management scenarios in a projection: what a scenario says (removals, releases, a change of
 * growth or of carrying capacity, from a year on), the status quo a survey's removals imply, and
 * the projection of every scenario beside the status quo from the same posterior draws with the
 * same random numbers (common random numbers), so that the difference between a scenario and the
 * status quo carries a far smaller Monte Carlo error than either alone. */
#ifndef TF_SCENARIO_H
#define TF_SCENARIO_H

#include <limits.h>
#include <stddef.h>

#include "project/project.h"
#include "survey/series.h"
#include "util/error.h"
#include "util/rng.h"

/* The most scenarios one projection takes, and the longest label. */
#define TF_SCENARIO_MAX 16
#define TF_SCENARIO_LABEL_MAX 40
/* from_year when not given: the first projected year. */
#define TF_SCENARIO_FROM_START INT_MIN
/* Years of the survey whose mean net removal the status quo continues (common practice, no
 * source: recent enough to reflect the current rules, long enough to even out one odd year). */
#define TF_SCENARIO_STATUS_QUO_YEARS 5

/* One scenario, as --scenario 'LABEL:key=value,...' gives it. */
typedef struct {
    char label[TF_SCENARIO_LABEL_MAX + 1];
    int has_remove;     /* remove= given */
    int remove_share;   /* 1: remove is a share of the population a year, in [0, 1) */
    double remove;      /* animals a year, or the share */
    int has_add;
    double add;         /* animals released a year */
    double growth;      /* added to the yearly log growth; 0 = none */
    double capacity;    /* factor on the carrying capacity K; 1 = none */
    int from_year;      /* the first year the action acts in, or TF_SCENARIO_FROM_START */
} tf_scenario;

/* Parses 'LABEL:key=value[,key=value...]' with keys remove=N (animals a year) or remove=P%
 * (a share, 0 <= P < 100), add=N (animals released a year), growth=D (added to the yearly log
 * growth), capacity=F (K times F, F > 0) and from=YEAR. The label is 1..TF_SCENARIO_LABEL_MAX
 * letters, digits, spaces, '-', '_' or '.', and not "status quo". At least one key, each at most
 * once. TF_ERR_PARSE (text that does not read: err names the bad key or value) or TF_ERR_RANGE
 * (a value out of range, naming the key); *out is then unspecified. */
tf_status tf_scenario_parse(const char *text, tf_scenario *out, tf_error *err);

/* The checks of a list that need no survey: labels unique, at most TF_SCENARIO_MAX. TF_ERR_USAGE
 * naming the repeated label. */
tf_status tf_scenario_check_list(const tf_scenario *sc, size_t n, tf_error *err);

/* Whether growth model g can take scenario list sc: TF_ERR_USAGE naming the scenario with a
 * capacity and the model when g has no carrying capacity (tf_project_capacity_index). */
tf_status tf_scenario_check_model(const tf_scenario *sc, size_t n, const tf_growth_type *g, tf_error *err);

/* Whether the from= years fit a projection from year0 (the last survey year) of horizon years:
 * year0 < from <= year0 + horizon. TF_ERR_USAGE naming the scenario otherwise, and when a year
 * is given without a survey (year0 TF_PROJECTION_NO_YEAR). */
tf_status tf_scenario_check_years(const tf_scenario *sc, size_t n, int year0, size_t horizon, tf_error *err);

/* The status quo of series s: the mean net removal (removed - added) in animals a year over its
 * last TF_SCENARIO_STATUS_QUO_YEARS years (all of them when fewer), or 0 when the series records
 * no removals or releases. *n_years (may be NULL) gets the number of years averaged (0 when none). */
double tf_scenario_status_quo_animals(const tf_series *s, size_t *n_years);

/* The projection options of scenario sc over base, whose status_quo is the status quo's action:
 * a scenario with remove= or add= replaces the status quo's take with its own (a share first,
 * then animals times the counted fraction q), one without keeps the status quo's take; growth and
 * capacity change the model; all from the step into from_year (year0 + 1 by default) on. keep_runs
 * is set. sc's years must have passed tf_scenario_check_years. */
void tf_scenario_options(const tf_scenario *sc, const tf_project_options *base, int year0, double q,
                         tf_project_options *out);

typedef struct tf_scenario_set tf_scenario_set;

/* Projects the status quo (base as it is, with keep_runs) and each scenario of sc (copied) from
 * inputs, each from a copy of stream: every projection draws the very same random numbers, and
 * the status quo's futures are those of tf_project_run(inputs, base, stream) digit for digit.
 * year0 and q as tf_scenario_options. On success *out holds the set (free with
 * tf_scenario_set_free); else NULL and the projection's error (a capacity on a model without one
 * is TF_ERR_INVALID). */
tf_status tf_scenario_set_run(const tf_project_input *inputs, size_t n_inputs, const tf_project_options *base,
                              const tf_rng *stream, const tf_scenario *sc, size_t n, int year0, double q,
                              tf_scenario_set **out, tf_error *err);
void tf_scenario_set_free(tf_scenario_set *s); /* accepts NULL */

size_t tf_scenario_set_n(const tf_scenario_set *s);
const tf_scenario *tf_scenario_set_scenario(const tf_scenario_set *s, size_t i);
const tf_projection *tf_scenario_set_projection(const tf_scenario_set *s, size_t i);
const tf_projection *tf_scenario_set_status_quo(const tf_scenario_set *s);
/* Scenario i minus the status quo, with the paired Monte Carlo error (tf_projection_risk_difference). */
tf_status tf_scenario_set_risk_difference(const tf_scenario_set *s, size_t i, size_t k, size_t t, double *diff,
                                          double *mcse, tf_error *err);
tf_status tf_scenario_set_decline_difference(const tf_scenario_set *s, size_t i, size_t w, size_t d, double *diff,
                                             double *mcse, tf_error *err);

/* "remove 40 a year from 2027", a scenario in words for a first page (always NUL-terminated). */
char *tf_scenario_describe(const tf_scenario *sc, char *buf, size_t size);

#endif
