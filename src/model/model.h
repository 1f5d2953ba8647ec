/* The model interface: a growth model and an observation model are each a row of function
 * pointers (like gsl_rng_type); a tf_model joins one of each with the first-year prior.
 * The particle filter and the sampler see only these rows, never model names. */
#ifndef TF_MODEL_H
#define TF_MODEL_H

#include <stddef.h>

#include <gsl/gsl_rng.h>

#include "survey/series.h"
#include "util/error.h"
#include "util/rng.h"

/* Most parameters of a joined model (drift + sigma + observation). */
#define TF_MAX_PARAMS 8
/* Most per-year constants an observation model may precompute. */
#define TF_OBS_MAX_CONST 4

/* Density dependence of log-abundance x: x_{t+1} = drift(x_t; p) + sigma * eps_t. */
typedef struct {
    const char *name;                 /* command-line name, e.g. "ricker" */
    const char *label;                /* for people, e.g. "Ricker" */
    size_t n_params;                  /* drift parameters (sigma is added by tf_model) */
    const char *const *param_names;   /* n_params names, e.g. {"r", "K"} */
    const double *lower, *upper;      /* open support of each parameter (may be +-INFINITY) */
    /* out[i] = x[i] + f(x[i]; p) for i < n. out may equal x. Written as one plain loop so that
     * the compiler vectorises it; called once per year, never per particle. */
    void (*drift)(const double *p, const double *x, double *out, size_t n);
} tf_growth_type;

/* Counting error: the distribution of a count y given its mean mu = effort * exp(x). */
typedef struct {
    const char *name;                 /* "poisson", "lognormal", "negbin" */
    const char *label;
    size_t n_params;
    const char *const *param_names;   /* e.g. {"tau"} */
    const double *lower, *upper;
    int needs_integer;                /* counts must be whole numbers */
    int needs_positive;               /* a zero count is impossible under this model */
    size_t n_year_const;              /* <= TF_OBS_MAX_CONST */
    /* Constants of one year's term that do not depend on the particle (ln y!, ln y, ...). */
    void (*year_const)(const double *p, double y, double *c);
    /* lw[i] += log p(y | mu_i), mu_i = exp(x[i] + log_effort), for i < n. One vectorisable loop. */
    void (*add_logweight)(const double *p, double y, double log_effort, const double *c,
                          const double *x, double *lw, size_t n);
    /* log p(y | mu) for one value: the reference the vector kernel is tested against. */
    double (*logpmf)(const double *p, double y, double mu);
    /* A count drawn given mu. */
    double (*draw)(const double *p, double mu, gsl_rng *rng);
    /* What the count y at log effort log_effort says about the log-abundance x, as a Gaussian in
     * x: log p(y | x) ~ const - prec (x - mode)^2 / 2 (Laplace's approximation about the mode of
     * x -> log p(y | x), with prec = -d2/dx2 log p there; Tierney & Kadane 1986, JASA 81:82).
     * Returns TF_PSEUDO_EXACT when log p(y | x) is exactly that Gaussian up to a constant,
     * TF_PSEUDO_APPROX when it is an approximation, TF_PSEUDO_NONE (mode and prec untouched)
     * when the count has no interior mode in x (a zero count under the count models) or the
     * model cannot have it. The particle filter's guided proposal and the sampler's cheap
     * screening likelihood are built on it; the derivations are in each model's file. */
    int (*pseudo_obs)(const double *p, double y, double log_effort, double *mode, double *prec);
    /* The first and second derivatives in x of log p(y | x) at x, for a count y > 0 that
     * pseudo_obs does not reject (the filter re-centres the Gaussian where the particles are,
     * filter.c). Where the exact derivatives are costly (rounded log-normal) the pseudo-
     * observation's own, prec (mode - x) and -prec. */
    void (*dlogp)(const double *p, double y, double log_effort, double x, double *d1, double *d2);
} tf_obs_type;

/* What tf_obs_type.pseudo_obs returns. */
enum { TF_PSEUDO_NONE = 0, TF_PSEUDO_APPROX = 1, TF_PSEUDO_EXACT = 2 };

/* The table of models (model/registry.c). NULL when the name is unknown. */
const tf_growth_type *tf_model_find_growth(const char *name);
const tf_obs_type *tf_model_find_obs(const char *name);
size_t tf_model_n_growth(void);
size_t tf_model_n_obs(void);
const tf_growth_type *tf_model_growth_at(size_t i);
const tf_obs_type *tf_model_obs_at(size_t i);

/* A joined model. Parameter order: drift parameters, then "sigma", then observation parameters. */
typedef struct tf_model tf_model;

/* Joins growth and observation models by name. Unknown names are TF_ERR_INVALID with a hint
 * listing the known ones. The first-year prior starts as x1 ~ Normal(0, 1) until
 * tf_model_set_initial is called. Free with tf_model_free. */
tf_status tf_model_new(const char *growth, const char *obs, tf_model **out, tf_error *err);
void tf_model_free(tf_model *m);

const tf_growth_type *tf_model_growth(const tf_model *m);
const tf_obs_type *tf_model_obs(const tf_model *m);
size_t tf_model_n_params(const tf_model *m);
const char *tf_model_param_name(const tf_model *m, size_t i);
double tf_model_param_lower(const tf_model *m, size_t i);
double tf_model_param_upper(const tf_model *m, size_t i);
/* Index of a named parameter, or -1. */
int tf_model_param_index(const tf_model *m, const char *name);
size_t tf_model_sigma_index(const tf_model *m);
/* "ricker+poisson" style name, stable for file names and random-stream keys. */
const char *tf_model_name(const tf_model *m);

/* First-year prior x_1 ~ Normal(mean, sd), sd > 0. */
void tf_model_set_initial(tf_model *m, double x1_mean, double x1_sd);
double tf_model_x1_mean(const tf_model *m);
double tf_model_x1_sd(const tf_model *m);

/* The first year of s whose count o cannot have: a fraction where o->needs_integer (looked for
 * first), else a zero where o->needs_positive; tf_series_n_years(s) when every count suits. *zero
 * says which (1: a zero, 0: a fraction). The one rule the commands and the comparison share. */
size_t tf_model_obs_unsuited(const tf_obs_type *o, const tf_series *s, int *zero);

/* Checks a full parameter vector against the supports; TF_ERR_RANGE names the parameter. */
tf_status tf_model_check_params(const tf_model *m, const double *theta, tf_error *err);

/* The surveyed years tf_model_initial_from_series averages over. */
#define TF_MODEL_X1_YEARS 3

/* Sets the first-year prior from the data: x1_mean = ln of the mean of count / effort over the
 * first TF_MODEL_X1_YEARS surveyed years (fewer if the series has fewer; a zero count counts as
 * 0.5), x1_sd = 1. TF_ERR_INVALID (m unchanged) when s has no surveyed year. */
tf_status tf_model_initial_from_series(tf_model *m, const tf_series *s, tf_error *err);

/* Writes "a, b, c": the known growth (or observation) model names, for hints and help texts.
 * Truncates to size (always terminated when size > 0). */
void tf_model_list_growth(char *buf, size_t size);
void tf_model_list_obs(char *buf, size_t size);

/* Removals and releases (a take in count units, negative for a release) act between a year's count
 * and the growth step: x' = ln(max(e^x - take, 0)), then x_next = drift(x') + sigma eps. A state
 * taken to zero is extinct: it is held at TF_MODEL_LOG_EXTINCT (e^-50 = 2e-22 count units, zero
 * for every purpose, yet a finite number that every counting-error kernel and drift takes without
 * a NaN), and any state at or below TF_MODEL_EXTINCT_BELOW (e^-40) stays extinct through the
 * drift, so that growth cannot bring back a population that is gone (the Gompertz map, linear in
 * x, would otherwise turn a very negative x into a large one when its feedback overshoots). Only
 * a release brings an extinct state back. The particle filter, the simulator and the projection
 * share these two steps. */
#define TF_MODEL_LOG_EXTINCT (-50.0)
#define TF_MODEL_EXTINCT_BELOW (-40.0)

/* x[i] <- ln(max(e^x[i] - take, 0)) for i < n, TF_MODEL_LOG_EXTINCT where nothing is left.
 * take == 0 leaves x untouched. */
void tf_model_take(double take, double *x, size_t n);

/* out[i] = drift(x[i]) as g->drift computes it, except TF_MODEL_LOG_EXTINCT where
 * x[i] <= TF_MODEL_EXTINCT_BELOW. out may equal x. */
void tf_model_drift_alive(const tf_growth_type *g, const double *p, const double *x, double *out, size_t n);

/* Simulates n_years of the joined model from x[0] = x1: x[t+1] = drift(x[t]) + sigma eps_t and
 * y[t] drawn by the observation model with mean effort[t] * exp(x[t]) (effort NULL = all 1).
 * theta must pass tf_model_check_params. Fills the caller's arrays x and y (n_years each) and
 * draws from rng. TF_ERR_NUMERIC when the abundance overflows or, for a model that cannot count
 * zero (needs_positive), falls to zero; x and y are then filled up to the failing year only. */
tf_status tf_model_simulate(const tf_model *m, const double *theta, double x1, const double *effort,
                            size_t n_years, tf_rng *rng, double *x, double *y, tf_error *err);

/* A harvest for tf_model_simulate_harvest: after each year's count, remove a fixed number of
 * animals (count > 0) or a share of those present (share in (0, 1)); at most the animals there
 * are. counted_fraction in (0, 1] turns animals into count units (tf_series_counted_fraction). */
typedef struct {
    double count;
    double share;
    double counted_fraction;
} tf_model_harvest;

/* tf_model_simulate with a harvest h (NULL = none: the same draws as tf_model_simulate). The
 * animals removed after year t's count, rounded to whole animals, go to removed[t] (n_years; the
 * last year's removal is drawn too, as a survey would record it). A population removed to zero is
 * extinct (x = -INFINITY, counts drawn with mean 0) for the years left; under a model that cannot
 * count zero that is TF_ERR_NUMERIC, as in tf_model_simulate. */
tf_status tf_model_simulate_harvest(const tf_model *m, const double *theta, double x1, const double *effort,
                                    const tf_model_harvest *h, size_t n_years, tf_rng *rng, double *x, double *y,
                                    double *removed, tf_error *err);

#endif
