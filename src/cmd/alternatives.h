/* The prior-sensitivity options that compare and analyze share: --prior-alternative DIR
 * (repeatable: a folder of edited copies of model files, as in TALLYFIT_MODELS, whose files take
 * the place of the priors used in the fit; a file it lacks leaves those as they are; the folder's
 * name labels its rows), --prior-sensitivity on|off and --prior-refit on|off; the checks of every folder
 * before any fit; and the callback that builds a candidate's priors from a folder. */
#ifndef TF_ALTERNATIVES_H
#define TF_ALTERNATIVES_H

#include <stdio.h>

#include "analysis/analysis.h"
#include "compare/sensitivity.h"
#include "survey/series.h"
#include "util/error.h"

enum { TF_ALT_OPT_DIR = 2000, TF_ALT_OPT_SENSITIVITY, TF_ALT_OPT_REFIT };

#define TF_ALTERNATIVES_LONGOPTS                                                                  \
    {"prior-alternative", required_argument, NULL, TF_ALT_OPT_DIR},                               \
    {"prior-sensitivity", required_argument, NULL, TF_ALT_OPT_SENSITIVITY},                       \
    {"prior-refit", required_argument, NULL, TF_ALT_OPT_REFIT}

typedef struct {
    int sensitivity;   /* 1 unless --prior-sensitivity off */
    int refit;         /* 1 unless --prior-refit off */
    size_t n;
    const char *dirs[TF_ANALYSIS_MAX_USER_ALTERNATIVES];   /* borrowed from argv */
    tf_sensitivity_alternative alt[TF_ANALYSIS_MAX_USER_ALTERNATIVES];   /* set by tf_alternatives_check */
    const char *first;   /* the first of these options given (for commands that refuse them) */
} tf_alternatives;

void tf_alternatives_init(tf_alternatives *a);

/* Reads option code with its text into a when it is one of the group's; returns the option's
 * name, or NULL for another code. A bad value is recorded in err. */
const char *tf_alternatives_option(int code, const char *text, tf_alternatives *a, tf_error *err);

/* Checks every folder before any fit and fills a->alt: the folder must be readable; every .ini
 * file in it must be named after a growth model or be observation.ini, read as a model file (so
 * an improper prior, an infinite bound of a uniform or a zero sd, is refused with its file and
 * line), name in its [model] section the model of its file name, and have sections for that
 * model's parameters only (an unknown parameter is refused with its line). Two folders of the
 * same name are refused. Errors: TF_ERR_INVALID (the folder or a file cannot be used),
 * TF_ERR_USAGE (too many folders, the sensitivity off while folders are given). */
tf_status tf_alternatives_check(tf_alternatives *a, tf_error *err);

/* The help lines of the options at width columns. */
void tf_alternatives_help(FILE *out, int width);

#endif
