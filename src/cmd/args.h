/* Helpers the commands share for their options: numbers, comma lists, name=value pairs, getopt
 * error messages, and binding `--parameter` values to a model's parameters. Every helper records what
 * went wrong in a tf_error (status TF_ERR_USAGE, naming the option) and prints nothing. */
#ifndef TF_ARGS_H
#define TF_ARGS_H

#include <stddef.h>
#include <stdint.h>

#include <stdio.h>

#include "filter/filter.h"
#include "model/model.h"
#include "cmd/setup.h"
#include "compare/evidence.h"
#include "sampler/pmmh.h"
#include "survey/survey.h"
#include "util/error.h"

/* Most pairs one list of name=value options holds, and the longest name. */
#define TF_ARGS_MAX_PAIRS 32
#define TF_ARGS_NAME_MAX 32

typedef struct {
    char name[TF_ARGS_NAME_MAX];
    double value;
} tf_arg_pair;

/* A small value type on the caller's stack; zero it with tf_args_pairs_init. */
typedef struct {
    size_t n;
    tf_arg_pair items[TF_ARGS_MAX_PAIRS];
} tf_arg_pairs;

void tf_args_pairs_init(tf_arg_pairs *p);

/* Appends the pairs of text "name=value,name=value,..." (spaces around items allowed) to p, so
 * an option may be repeated. Errors: an empty item, a missing '=', an empty or over-long name,
 * a value that is not a finite number, a name given twice, more than TF_ARGS_MAX_PAIRS pairs.
 * opt ("--parameter") names the option in messages. On error p keeps the pairs added before. */
tf_status tf_args_parse_pairs(const char *opt, const char *text, tf_arg_pairs *p, tf_error *err);

/* The pair with that name, or NULL. */
const tf_arg_pair *tf_args_pairs_get(const tf_arg_pairs *p, const char *name);

/* One finite number. */
tf_status tf_args_parse_double(const char *opt, const char *text, double *out, tf_error *err);

/* A comma list "a,b,c" of finite numbers into out (room for max); *n receives the count.
 * Errors: an empty item, a bad number, more than max items. */
tf_status tf_args_parse_doubles(const char *opt, const char *text, double *out, size_t max, size_t *n,
                                tf_error *err);

/* A comma list of names "a,b,c" (blanks around items allowed): copies text into buf (size
 * bytes) and points names[0 .. *n) at the items within it. Errors: a list longer than buf, an
 * empty item, more than max items. Whether the names mean anything is for the caller. */
tf_status tf_args_split_names(const char *opt, const char *text, char *buf, size_t size, const char **names,
                              size_t max, size_t *n, tf_error *err);

/* A --model / --obs list of candidate models: "all" (*all = 1, *n = 0), or a comma list split as
 * tf_args_split_names (at most max) whose every name is a known growth model (growth non-zero)
 * or counting-error model; an unknown one is TF_ERR_USAGE with the known names in the hint. */
tf_status tf_args_model_names(const char *opt, const char *text, char *buf, size_t size, const char **names,
                              size_t max, size_t *n, int *all, int growth, tf_error *err);

/* A whole number in [min, max] (decimal digits, optional sign for long). */
tf_status tf_args_parse_size(const char *opt, const char *text, size_t min, size_t max, size_t *out,
                             tf_error *err);
tf_status tf_args_parse_long(const char *opt, const char *text, long min, long max, long *out, tf_error *err);

/* A --proposal value: "guided" or "bootstrap" (filter/filter.h). */
tf_status tf_args_parse_proposal(const char *opt, const char *text, tf_proposal *out, tf_error *err);

/* The help line of --proposal, shared by every command that runs the particle filter. */
#define TF_ARGS_PROPOSAL_HELP                                                                      \
    "  --proposal P       how the particle filter moves: guided (default; looks at each year's\n"   \
    "                     count first, far fewer particles for large counts) or bootstrap (the\n"    \
    "                     growth model alone, for checks and comparisons)\n"

/* A random seed: any whole number from 0 to 2^64 - 1. */
tf_status tf_args_parse_seed(const char *opt, const char *text, uint64_t *out, tf_error *err);

/* Describes a getopt_long failure (optstring starting with ':'): c is getopt's return (':' or
 * '?'), opt_char getopt's optopt, arg the argv element that caused it. cmd names the command
 * for the hint ("run 'tallyfit CMD --help'"); an option of an earlier version (--models, --set,
 * --fixed, --priors, --populations) gets its new name in the hint instead. Returns TF_ERR_USAGE. */
tf_status tf_args_getopt_error(const char *cmd, int c, int opt_char, const char *arg, tf_error *err);

/* The survey file named after the options: argv[first], or NULL when there is none. A further
 * argument is an error ("unexpected argument"). */
const char *tf_args_survey_path(int argc, char **argv, int first, tf_error *err);

/* Records that the survey file is missing; the hint names the --help of command cmd. */
tf_status tf_args_no_survey(const char *cmd, tf_error *err);

/* The series a command works on: the one named population (--population; may be NULL), or the
 * survey's only one. Errors (TF_ERR_USAGE, naming path): no population of that name, or several
 * populations and none chosen; the hint lists the populations, each in quotes. Borrowed from sv. */
const tf_series *tf_args_pick_series(const tf_survey *sv, const char *population, const char *path,
                                     tf_error *err);

/* The names of `--prior`: the first-year prior, which tf_args_bind_model takes besides the model's
 * parameters. */
#define TF_ARGS_X1_MEAN "x1_mean"
#define TF_ARGS_X1_SD "x1_sd"

/* Checks that the --parameter list values names no first-year prior and that the --prior list
 * prior names only x1_mean and x1_sd (TF_ERR_USAGE with the other option in the hint), then
 * appends prior's pairs to values, for tf_args_bind_model. Errors are recorded in err; values
 * is unchanged on error. */
tf_status tf_args_merge_prior(tf_arg_pairs *values, const tf_arg_pairs *prior, tf_error *err);

/* Binds set to m: every name must be a parameter of m or x1_mean / x1_sd (else an error whose
 * hint lists the model's names). Values go to theta (model order) and given[i] is set to 1 for
 * each parameter given (given may be NULL); with require_all, a missing parameter is an error.
 * Each given value must lie inside its support (TF_ERR_USAGE naming it). x1_mean / x1_sd, when
 * present, replace m's first-year prior (x1_sd must be > 0). theta entries not given are left
 * as they were; on error m's prior is unchanged and theta may hold some of the valid values. */
tf_status tf_args_bind_model(tf_model *m, const tf_arg_pairs *set, int require_all, double *theta,
                             unsigned char *given, tf_error *err);

/* A model joined from growth and obs whose every parameter is given in set (tf_args_bind_model
 * with require_all), its values in theta. On success the caller frees *out (tf_model_free); on
 * failure *out is NULL. */
tf_status tf_args_model_at(const char *growth, const char *obs, const tf_arg_pairs *set, tf_model **out,
                           double *theta, tf_error *err);

/* Checks that growth and obs name known models, so that a mistyped name is refused before a
 * large file is read. */
tf_status tf_args_check_model(const char *growth, const char *obs, tf_error *err);

/* The sampler's run-length options: --iterations (a fixed length), --min-iterations,
 * --max-iterations, --min-ess, --thin, --kept-draws and --delayed-acceptance. They are part of
 * the sampler group below (TF_ARGS_SAMPLER_LONGOPTS), which every command that fits declares. */
enum { TF_ARGS_OPT_ITER = 1000, TF_ARGS_OPT_MIN_ITER, TF_ARGS_OPT_MAX_ITER, TF_ARGS_OPT_MIN_ESS,
       TF_ARGS_OPT_THIN, TF_ARGS_OPT_KEPT, TF_ARGS_OPT_DELAYED, TF_ARGS_OPT_CHAINS, TF_ARGS_OPT_WARMUP,
       TF_ARGS_OPT_PARTICLES, TF_ARGS_OPT_PROPOSAL, TF_ARGS_OPT_CORRELATED, TF_ARGS_OPT_STANDARD,
       TF_ARGS_OPT_SEED, TF_ARGS_OPT_THREADS, TF_ARGS_OPT_PRIOR_FILE, TF_ARGS_OPT_PRIOR, TF_ARGS_OPT_ML_SE,
       TF_ARGS_OPT_DRAWS, TF_ARGS_OPT_WEIGHTS, TF_ARGS_OPT_RECENT };
#define TF_ARGS_RUN_LONGOPTS                                                                      \
    {"iterations", required_argument, NULL, TF_ARGS_OPT_ITER},                                    \
    {"min-iterations", required_argument, NULL, TF_ARGS_OPT_MIN_ITER},                            \
    {"max-iterations", required_argument, NULL, TF_ARGS_OPT_MAX_ITER},                            \
    {"min-ess", required_argument, NULL, TF_ARGS_OPT_MIN_ESS},                                    \
    {"thin", required_argument, NULL, TF_ARGS_OPT_THIN},                                          \
    {"kept-draws", required_argument, NULL, TF_ARGS_OPT_KEPT},                                    \
    {"delayed-acceptance", required_argument, NULL, TF_ARGS_OPT_DELAYED}

/* The run-length options as given; 0 (NAN for min_ess) where not given. Zero it with
 * tf_args_run_init. */
typedef struct {
    size_t iterations, min_iter, max_iter, thin, kept;
    double min_ess;
    int delayed;   /* --delayed-acceptance on (1) or off (0); -1 = not given */
} tf_args_run;

void tf_args_run_init(tf_args_run *r);

/* Reads option code (with its argument text) into r when it is one of the run-length options and
 * returns the option's name ("--thin"); returns NULL for any other code. A bad value is recorded
 * in err. */
const char *tf_args_run_option(int code, const char *text, tf_args_run *r, tf_error *err);

/* Puts the options given over opt's: --iterations I sets both the minimum and the maximum (a
 * run of fixed length) and cannot be combined with either. Refuses a minimum above the maximum,
 * and a thinning above the minimum (no draw would be kept). */
tf_status tf_args_run_apply(const tf_args_run *r, tf_pmmh_options *opt, tf_error *err);

/* ---- the sampler group ----
 * One set of options, one set of limits and one help text for every command that fits models
 * (fit, compare, analyze, forecast): chains, warm-up, particles, proposal, standard or
 * correlated method, the run length (tf_args_run), seed, threads, the priors, and, on the
 * commands that estimate a marginal likelihood, its options. A command puts
 * TF_ARGS_SAMPLER_LONGOPTS (and TF_ARGS_ML_LONGOPTS when it estimates a marginal likelihood) in
 * its getopt_long table and passes every option code it does not know itself to
 * tf_args_sampler_option. */
#define TF_ARGS_SAMPLER_LONGOPTS                                                                  \
    TF_ARGS_RUN_LONGOPTS,                                                                         \
    {"chains", required_argument, NULL, TF_ARGS_OPT_CHAINS},                                      \
    {"warmup", required_argument, NULL, TF_ARGS_OPT_WARMUP},                                      \
    {"particles", required_argument, NULL, TF_ARGS_OPT_PARTICLES},                                \
    {"proposal", required_argument, NULL, TF_ARGS_OPT_PROPOSAL},                                  \
    {"correlated", no_argument, NULL, TF_ARGS_OPT_CORRELATED},                                    \
    {"standard", no_argument, NULL, TF_ARGS_OPT_STANDARD},                                        \
    {"seed", required_argument, NULL, TF_ARGS_OPT_SEED},                                          \
    {"threads", required_argument, NULL, TF_ARGS_OPT_THREADS},                                    \
    {"recent-years", required_argument, NULL, TF_ARGS_OPT_RECENT},                                \
    {"prior-file", required_argument, NULL, TF_ARGS_OPT_PRIOR_FILE},                              \
    {"prior", required_argument, NULL, TF_ARGS_OPT_PRIOR}
#define TF_ARGS_ML_LONGOPTS                                                                       \
    {"ml-se", required_argument, NULL, TF_ARGS_OPT_ML_SE},                                        \
    {"draws", required_argument, NULL, TF_ARGS_OPT_DRAWS},                                        \
    {"model-weights", required_argument, NULL, TF_ARGS_OPT_WEIGHTS}

/* Limits of the group that only guard memory and time against typos. */
#define TF_ARGS_MIN_WARMUP ((size_t)20)
#define TF_ARGS_MAX_WARMUP ((size_t)10000000)
#define TF_ARGS_MAX_PARTICLES ((size_t)10000000)
#define TF_ARGS_MIN_DRAWS ((size_t)100)
#define TF_ARGS_MAX_DRAWS ((size_t)10000000)
#define TF_ARGS_MAX_THREADS ((size_t)256)

/* The sampler options as given; 0, -1, NULL or NAN where not given. Set it up with
 * tf_args_sampler_init. */
typedef struct {
    tf_args_run run;
    size_t chains, warmup, particles, threads, draws, recent_years;
    int proposal_given, seed_given;
    tf_proposal proposal;
    int correlated;          /* --correlated (1), --standard (0), -1 = neither */
    uint64_t seed;
    const char *prior_file;  /* --prior-file, borrowed from argv */
    tf_arg_pairs prior;      /* --prior x1_mean=..,x1_sd=.. */
    double ml_se;            /* NAN = not given */
    tf_arg_pairs weights;    /* --model-weights NAME=W,... */
    const char *first;       /* the first option of the group given, --seed aside */
    const char *first_ml;    /* the first option of the comparison given (--ml-se, --draws, --model-weights) */
} tf_args_sampler;

void tf_args_sampler_init(tf_args_sampler *s);

/* Reads option code (with its argument text) into s when it is one of the group's options and
 * returns the option's name ("--chains"); returns NULL for any other code. A bad value is
 * recorded in err. */
const char *tf_args_sampler_option(int code, const char *text, tf_args_sampler *s, tf_error *err);

/* Puts the options given over fit's and, when ml is not NULL, over ml's (seed, particles and
 * proposal go to both): the run length as tf_args_run_apply. --seed goes to *seed and --threads
 * to *n_threads when given (either may be NULL: fit's own fields are then used). Refuses a
 * marginal-likelihood option when ml is NULL, and a --prior name other than x1_mean and x1_sd.
 * The importance draws' adaptation rounds are kept within --draws. Every problem is recorded in
 * err; returns its status. */
tf_status tf_args_sampler_apply(const tf_args_sampler *s, tf_pmmh_options *fit, tf_evidence_options *ml,
                                uint64_t *seed, size_t *n_threads, tf_error *err);

/* The priors the user set (--prior-file, --prior) as the comparison's priors callback takes them
 * (setup.h): u borrows s's file name. */
void tf_args_sampler_user(const tf_args_sampler *s, tf_setup_user *u);

/* The prior model weights given (--model-weights) as the comparison takes them: names (borrowed
 * from s) and values into arrays of TF_ARGS_MAX_PAIRS; returns how many. Checks, before any fit,
 * that each name is a candidate's (a growth model of growth[0 .. n_growth), every one when
 * n_growth = 0, or such a growth model joined with a counting-error model of obs[0 .. n_obs),
 * any known one when n_obs = 0, as "ricker+poisson") and each weight positive: TF_ERR_USAGE
 * otherwise. */
tf_status tf_args_sampler_weights(const tf_args_sampler *s, const char *const *growth, size_t n_growth,
                                  const char *const *obs, size_t n_obs, const char **names, double *values,
                                  size_t *n, tf_error *err);

/* Prints the help of the group with the defaults of fit (and, when ml is not NULL, of the
 * marginal likelihood), every option's name padded to width columns: the same text in every
 * command. */
void tf_args_sampler_help(FILE *out, const tf_pmmh_options *fit, const tf_evidence_options *ml, int width);

/* The help line of -q/--quiet, the same in every command, at width columns. */
void tf_args_quiet_help(FILE *out, int width);

/* The default number of threads: the processors online (1 when unknown), at most max. */
size_t tf_args_default_threads(size_t max);

/* Reads the survey a command was given: a path, or "-" for standard input (named "stdin" in
 * messages). Same contract as tf_survey_read. */
tf_status tf_args_read_survey(const char *path, tf_survey **out, tf_error *err);
/* The same under the reading options o (survey.h). */
tf_status tf_args_read_survey_with(const char *path, const tf_survey_options *o, tf_survey **out, tf_error *err);

/* The survey's file name without directories and without a final ".csv": the name its output
 * folder and workbook take. "stdin" for "-", "survey" when nothing is left. */
void tf_args_survey_name(const char *path, char *out, size_t size);

/* The folder names of a survey's populations, as tf_path_folder_names gives them among all of
 * them (the one rule of every command, the analysis and the batch), made once per command: the
 * rule makes each name unique against the earlier ones, so a population's name takes the whole
 * list. */
typedef struct {
    size_t n;
    const char **labels;   /* borrowed from the survey */
    char **names;
} tf_args_folders;

/* The names of sv's populations (sv may be NULL: none). TF_ERR_NOMEM on failure (f then holds
 * nothing to free). Free with tf_args_folders_free. */
tf_status tf_args_folders_new(const tf_survey *sv, tf_args_folders *f, tf_error *err);
void tf_args_folders_free(tf_args_folders *f);

/* The folder name of the population labelled label: its name among the survey's, or the rule
 * applied to that label alone when the survey holds no such population. Writes at most size
 * bytes. */
void tf_args_folder_of(const tf_args_folders *f, const char *label, char *out, size_t size);

/* The output folder of one population, as fit, compare and forecast choose it: out_dir, or
 * output/<base> when out_dir is NULL (base: the survey's name, tf_args_survey_name), with
 * /<label made safe> (tf_path_safe_name; pass the tf_args_folder_of name) below it when
 * several. A folder too long for dir (size bytes) is refused,
 * not cut (a cut name would be another folder): TF_ERR_USAGE. */
tf_status tf_args_output_dir(char *dir, size_t size, const char *out_dir, const char *base, const char *label,
                             int several, tf_error *err);

/* Checks, before any long work, that output folder dir exists or can be made and that a file can
 * be created in it: makes the missing folders and a probe file, then removes both, so nothing is
 * left. TF_ERR_IO naming the cause (a file in the way, permissions, a read-only file system...),
 * TF_ERR_USAGE for an empty or too long name, or when dir (or a folder above it) is the survey
 * file input (may be NULL or "-"). */
tf_status tf_args_probe_output_dir(const char *dir, const char *input, tf_error *err);
/* The same, keeping the folders it made when keep_dirs is set: processes of one MPI run probe the
 * same folder at once, and one must not remove a folder another is probing. */
tf_status tf_args_probe_output_dir_keep(const char *dir, const char *input, int keep_dirs, tf_error *err);

/* The exit code (cmd.h) for a library status, the one mapping every command uses once its input
 * is read: usage and refused combinations are command-line errors (2), well-formed but unusable
 * input (TF_ERR_INVALID: a value or name in the survey, a model or a priors file) is an unusable
 * input (3, as every help's exit-status list says), interruption 130, anything else (memory,
 * files that cannot be written, a computation that failed) a job that could not be done (1).
 * Failures while the input file itself is read are the input's (3) whatever their status, and
 * the commands say so where they read it. The library steps of a fit give the status that maps
 * to the same code in every command: counts a model cannot have, a series without a surveyed
 * year, model and priors files that cannot be read or used (tf_setup_priors) are TF_ERR_INVALID
 * (3); a sampler that cannot start and a population whose every candidate failed TF_ERR_NUMERIC
 * (1); fit, compare, analyze and forecast map them through this function alone. */
int tf_args_exit_code(tf_status st);

#endif
