/* The survey as every command that reads one takes it: whole counts or declared estimates, the
 * populations chosen (--population LABEL[,LABEL]) and those left out because they cannot be used
 * (--skip-unusable), each refused or warned about before any long work starts. */
#ifndef TF_INPUT_H
#define TF_INPUT_H

#include <stdio.h>

#include "survey/survey.h"
#include "util/error.h"

/* Most labels one --population list holds. */
#define TF_INPUT_MAX_LABELS 64

/* Help lines of the three options, for each command's --help (descriptions at column 21). */
#define TF_INPUT_HELP                                                                                          \
    "  --population LIST  only these populations: labels separated by commas (default: all)\n"             \
    "  --skip-unusable    leave out, with a warning, every population that cannot be fitted\n"             \
    "                     (too few surveyed years, bad rows...) instead of refusing the file\n"            \
    "  --estimates        the count column holds estimates (indices, densities, corrected\n"               \
    "                     counts) that need not be whole numbers: only counting-error models\n"           \
    "                     of continuous amounts (lognormal) then apply. Without it a\n"                 \
    "                     count that is not a whole number is an error\n"                                 \
    "  --counted-fraction Q  the share of the animals present that a count at effort 1\n"                   \
    "                     includes, in (0, 1] (default 1: counts are censuses up to counting\n"            \
    "                     error); links the survey's removed/added animals to the counts\n"

/* Help lines of --effort-name, for the commands whose tables give abundances in a unit. */
#define TF_INPUT_EFFORT_HELP                                                                                   \
    "  --effort-name TEXT the unit of the effort column in a few words (\"trap-night\"): where\n"          \
    "                     effort varies, abundances read \"count units per TEXT\" instead of\n"             \
    "                     \"count units per unit effort\" (at most 32 characters, no comma)\n"

/* A small value type on the caller's stack; zero it before use. */
typedef struct {
    int estimates;          /* --estimates */
    const char *effort_name; /* --effort-name, checked; borrowed from argv; NULL = not named */
    int skip_unusable;      /* --skip-unusable */
    double counted_fraction; /* --counted-fraction; 0 = not given (1) */
    size_t n_labels;        /* --population, split: labels[0 .. n_labels) point into buf */
    const char *labels[TF_INPUT_MAX_LABELS];
    char buf[1024];
} tf_input;

/* Splits a --population list into in (blanks around labels allowed, a label given twice is kept
 * once). TF_ERR_USAGE for an empty label or too many. A repeated option replaces the list. */
tf_status tf_input_set_population(tf_input *in, const char *text, tf_error *err);

/* --counted-fraction Q or P%: TF_ERR_USAGE unless a share in (0, 1]. The parse alone, for a
 * command without a survey (simulate), and the setting of in. */
tf_status tf_input_parse_counted_fraction(const char *text, double *out, tf_error *err);
tf_status tf_input_set_counted_fraction(tf_input *in, const char *text, tf_error *err);
/* The counted fraction in force: the one given, else 1. */
double tf_input_counted_fraction(const tf_input *in);

/* A removal more than this many times the most animals any count of the population implies
 * (count / (effort q)) is refused as implausible: a choice of ours, wide enough for a population
 * counted only when low, narrow enough to catch removals typed in other units or with extra
 * digits. */
#define TF_INPUT_REMOVAL_FACTOR 10.0

/* Sets --effort-name after checking it (tf_series_check_effort_name: TF_ERR_USAGE). text is
 * borrowed and must outlive in. */
tf_status tf_input_set_effort_name(tf_input *in, const char *text, tf_error *err);

/* The one population chosen, or NULL when none or several were. */
const char *tf_input_single(const tf_input *in);

/* Reads the survey at path ("-" = standard input) as in says. Without --population and
 * --skip-unusable this is the strict reading: any problem refuses the file. Otherwise the file is
 * read population by population: a chosen population (every one without --population) that cannot
 * be used is an error with its first problem (TF_ERR_INVALID or the problem's own status), or with
 * --skip-unusable a warning on warn (may be NULL) naming the population, line and problem; a label
 * the file does not hold is TF_ERR_USAGE listing the labels it does. With two labels or more only
 * those populations are kept (tf_survey_keep). Leaving every population out is TF_ERR_INVALID.
 * prog prefixes the warnings. Every series gets the counted fraction in force; the removals of each
 * chosen population are checked against its counts: more than TF_INPUT_REMOVAL_FACTOR times the
 * most animals a count implies is TF_ERR_RANGE with the line; a removal or release in a year
 * without a count, and a removal above what that year's count implies, are warnings on warn.
 * On success the caller frees *out. */
tf_status tf_input_read(const tf_input *in, const char *path, FILE *warn, const char *prog, tf_survey **out,
                        tf_error *err);

/* What tf_input_read does after reading, for a survey read another way (a batch): sets the
 * counted fraction of every series and checks the removals of the chosen populations. */
tf_status tf_input_prepare(const tf_input *in, tf_survey *sv, const char *path, FILE *warn, const char *prog,
                           tf_error *err);

/* Prints a warning on out for every count of sv (of population only, when not NULL) far from its
 * neighbours (tf_series_outliers), naming the file, line, population, year and value; returns
 * how many. */
size_t tf_input_warn_outliers(const tf_survey *sv, const char *only, const char *path, const char *prog, FILE *out);

/* With --estimates, every counting-error model named in names[0 .. n) must be one of continuous
 * amounts: a count model (Poisson, negative binomial, rounded log-normal) is TF_ERR_USAGE naming
 * opt. Without --estimates: TF_OK. */
tf_status tf_input_check_obs(const tf_input *in, const char *opt, const char *const *names, size_t n,
                             tf_error *err);

/* The counting-error model of the one-model commands when --obs is not given: poisson, or
 * lognormal with --estimates. */
const char *tf_input_default_obs(const tf_input *in);

/* The counting-error models of continuous amounts (those --estimates allows), by name, into
 * names (room for max); returns how many. */
size_t tf_input_continuous_obs(const char **names, size_t max);

#endif
