/* Model files: the plain-text files (one .ini file per model under models/, parsed with inih)
 * that name a model and give the default prior of each of its parameters, and the search for
 * the directory holding them.
 *
 * Format: a [model] section (name = ..., description = ...; the description may continue on
 * indented lines), then one section per parameter:
 *     [K]
 *     prior = lognormal      ; normal, lognormal, halfnormal, gamma, uniform, student_t
 *     meanlog = survey       ; a number, or "survey" (lognormal only, see below)
 *     sdlog = 1.5
 *     lower = 1              ; optional truncation, "inf" / "-inf" allowed
 *     upper = inf
 * The keys of each family are the parameter names tf_prior_par_name gives. "meanlog = survey"
 * means log(m) + survey_shift, m = the survey's median count per unit effort, given when the
 * prior is built (survey_shift is optional, default 0, and only allowed with "survey"). */
#ifndef TF_MODEL_FILE_H
#define TF_MODEL_FILE_H

#include <stddef.h>

#include "model/prior.h"
#include "util/error.h"

/* The environment variable naming a directory of model files searched first. */
#define TF_MODELS_ENV "TALLYFIT_MODELS"

typedef struct tf_model_file tf_model_file;

/* Reads and checks the model file at path. Every problem found is added to err (file, line and
 * the key or section concerned): syntax errors (inih reports the first), lines too long,
 * keys outside a section, unknown or repeated keys, unknown distributions, missing or
 * non-numeric values, inadmissible parameters (sd <= 0, ...), lower >= upper, truncations with
 * no probability, a missing [model] name. Status: TF_ERR_IO (cannot read), TF_ERR_PARSE (the
 * file is malformed), TF_ERR_NOMEM. On success the caller frees *out with tf_model_file_free;
 * on failure *out is NULL. */
tf_status tf_model_file_read(const char *path, tf_model_file **out, tf_error *err);
/* The same for text in memory; label names it in error messages (like a path). */
tf_status tf_model_file_parse(const char *text, const char *label, tf_model_file **out, tf_error *err);
void tf_model_file_free(tf_model_file *mf);

/* Borrowed strings, valid until tf_model_file_free. */
const char *tf_model_file_label(const tf_model_file *mf);       /* the path or label given */
const char *tf_model_file_name(const tf_model_file *mf);        /* [model] name */
const char *tf_model_file_description(const tf_model_file *mf); /* "" when none */

/* The parameters that have a section, in file order. */
size_t tf_model_file_n_params(const tf_model_file *mf);
const char *tf_model_file_param_at(const tf_model_file *mf, size_t i);
/* Whether the file has a section for param. */
int tf_model_file_has(const tf_model_file *mf, const char *param);
/* Whether any prior is scaled by the survey (needs a survey median to be built). */
int tf_model_file_needs_survey(const tf_model_file *mf);

/* One TF_ERR_INVALID error (with the section's line) for each section that names no parameter
 * in names[0..n_names): a prior for a parameter the model does not have. */
tf_status tf_model_file_check_names(const tf_model_file *mf, const char *const *names, size_t n_names,
                                    tf_error *err);

/* Builds the prior of param into *out. survey_median is the survey's median count per unit
 * effort, used only by survey-scaled priors; pass NAN when there is none. Errors: TF_ERR_INVALID
 * when the file has no section for param, when a survey-scaled prior gets no finite positive
 * median (the hint says how to fix a number instead), or when the resolved prior is unusable. */
tf_status tf_model_file_prior(const tf_model_file *mf, const char *param, double survey_median, tf_prior *out,
                              tf_error *err);

/* Assigns to set the prior of every set parameter that has a section in mf (others are left as
 * they are; sections naming no set parameter are ignored, see tf_model_file_check_names).
 * Errors as tf_model_file_prior and tf_prior_set_assign, with the file and line of the section;
 * all are collected, and the set keeps what was assigned before the first failure and after. */
tf_status tf_model_file_apply(const tf_model_file *mf, double survey_median, tf_prior_set *set, tf_error *err);

/* Finds file_name (e.g. "ricker.ini", a plain file name) in the model directories, in order:
 * $TALLYFIT_MODELS; <directory of the running program>/models; <that directory>/../share/
 * tallyfit/models; the source tree's models/ when the program lies inside the tree it was built
 * from (TF_SOURCE_DIR, set by the Makefile: build/mpi/tallyfit); the compiled-in TF_MODEL_DIR
 * when defined. Writes the first readable path
 * into path[0..size). Errors: TF_ERR_INVALID for a name with a '/', TF_ERR_IO when no directory
 * has it (the message lists the places searched; the hint names TALLYFIT_MODELS), TF_ERR_RANGE
 * when the path does not fit. */
tf_status tf_model_file_locate(const char *file_name, char *path, size_t size, tf_error *err);

/* tf_model_file_locate("<model_name>.ini") then tf_model_file_read. */
tf_status tf_model_file_read_default(const char *model_name, tf_model_file **out, tf_error *err);

#endif
