/* Prior distributions of model parameters: one parameter's prior (optionally truncated, always a
 * normalised density, because marginal likelihoods are compared across models), and the set of
 * priors of a joined model. */
#ifndef TF_PRIOR_H
#define TF_PRIOR_H

#include <stddef.h>

#include "util/error.h"
#include "util/rng.h"

/* The distribution families. The comment lists each family's parameters in the order that
 * tf_prior_init's par[] takes them (and the key names model files use). */
typedef enum {
    TF_PRIOR_NORMAL,     /* mean, sd */
    TF_PRIOR_LOGNORMAL,  /* meanlog, sdlog: log x ~ Normal(meanlog, sdlog) */
    TF_PRIOR_HALFNORMAL, /* sd: |Z| * sd on [0, inf) */
    TF_PRIOR_GAMMA,      /* shape, rate: density rate^shape x^(shape-1) e^(-rate x) / Gamma(shape) */
    TF_PRIOR_UNIFORM,    /* min, max */
    TF_PRIOR_STUDENT_T,  /* location, scale, df */
    TF_PRIOR_N_KINDS
} tf_prior_kind;

#define TF_PRIOR_MAX_PAR 3

/* One parameter's prior. A small value type so that arrays of priors need no allocation; fill
 * it only with tf_prior_init (the derived fields must agree with the others) and treat the
 * fields as read-only. */
typedef struct {
    tf_prior_kind kind;
    double par[TF_PRIOR_MAX_PAR]; /* tf_prior_n_par(kind) values; the rest are 0 */
    double trunc_lo, trunc_hi;    /* truncation as given; -INFINITY / INFINITY = none */
    double lower, upper;          /* support: the family's support cut to [trunc_lo, trunc_hi] */
    /* Derived: untruncated lower-tail (p_) and upper-tail (q_) probabilities at the support's
     * ends, and the log of the untruncated probability of the support. Kept as both tails so
     * that truncation far out in either tail keeps its precision. */
    double p_lo, p_hi, q_lo, q_hi;
    double log_mass;
} tf_prior;

/* "normal", "lognormal", ... ; NULL for an out-of-range kind. */
const char *tf_prior_kind_name(tf_prior_kind kind);
/* The kind named name (exact, lower case), or -1 when unknown. */
int tf_prior_kind_from_name(const char *name);
/* Number of parameters of a family, and the name of the i-th ("mean", "sd", ...; NULL if out
 * of range). */
size_t tf_prior_n_par(tf_prior_kind kind);
const char *tf_prior_par_name(tf_prior_kind kind, size_t i);
/* NULL when value is admissible as the i-th parameter of the family, else the rule it breaks
 * ("must be a positive finite number"), for error messages. A uniform's min < max is checked by
 * tf_prior_init, not here. */
const char *tf_prior_par_check(tf_prior_kind kind, size_t i, double value);

/* Fills p with the family kind, parameters par[0 .. tf_prior_n_par(kind)) and truncation to
 * [lo, hi] (pass -INFINITY, INFINITY for none; bounds outside the family's support are
 * harmless). Errors (p is then left unusable): TF_ERR_INVALID for an unknown kind, an
 * inadmissible parameter, NaN bounds, lo >= hi or a support left empty; TF_ERR_RANGE when the
 * truncation leaves no probability that double precision can represent. Nothing is allocated. */
tf_status tf_prior_init(tf_prior *p, tf_prior_kind kind, const double *par, double lo, double hi,
                        tf_error *err);

/* Log of the normalised (truncated) density at x on the natural scale; -INFINITY outside the
 * support (the support's ends count as inside where the density is finite there). */
double tf_prior_log_density(const tf_prior *p, double x);
/* Distribution function of the truncated prior at x (0 below, 1 above the support). */
double tf_prior_cdf(const tf_prior *p, double x);
/* Quantile of the truncated prior at probability prob in (0, 1); NaN for prob outside [0, 1].
 * Computed through the tail with the larger precision, so extreme truncations stay accurate. */
double tf_prior_quantile(const tf_prior *p, double prob);
/* One draw from the truncated prior by inversion of its distribution function (exact for any
 * truncation), using one uniform from rng. */
double tf_prior_draw(const tf_prior *p, tf_rng *rng);

/* The prior p with its scale multiplied by factor (> 0, finite), into *out: the spread changes,
 * the centre and the truncation bounds stay. The scale of each family:
 *   normal: sd;  lognormal: sdlog (the spread of log x about the median e^meanlog);
 *   halfnormal: sd;  student_t: scale;  gamma: the scale 1 / rate (rate / factor, shape kept,
 *   so the whole law is stretched: x -> factor x);  uniform: the half-width about the midpoint.
 * Twice the scale is about half the density over the bulk of a location-scale family, which is
 * what moves a marginal likelihood (Kass & Raftery 1995, JASA 90:773, section 5). Errors as
 * tf_prior_init (a stretched law whose truncation keeps no probability), TF_ERR_INVALID for a
 * bad factor. */
tf_status tf_prior_rescale(const tf_prior *p, double factor, tf_prior *out, tf_error *err);

/* Writes e.g. "lognormal(meanlog=6.2, sdlog=1.5) truncated to [1, inf)" into buf (always
 * NUL-terminated when size > 0); the truncation part appears only when it cuts the family's
 * support. Returns the length the full text needs, as snprintf does. */
size_t tf_prior_describe(const tf_prior *p, char *buf, size_t size);

/* The priors of a joined model: one per named parameter, in the model's parameter order.
 * Opaque; built empty by tf_prior_set_new and filled with tf_prior_set_assign. */
typedef struct tf_prior_set tf_prior_set;

/* A set for n_params parameters named names[0..n_params) (copied; names must be distinct and
 * non-empty, n_params <= 64). lower/upper, when not NULL, are the model's supports of each
 * parameter (copied): tf_prior_set_assign then refuses a prior whose support leaves them.
 * Errors: TF_ERR_INVALID (bad names), TF_ERR_NOMEM. The caller frees *out with
 * tf_prior_set_free; on failure *out is NULL. */
tf_status tf_prior_set_new(size_t n_params, const char *const *names, const double *lower,
                           const double *upper, tf_prior_set **out, tf_error *err);
void tf_prior_set_free(tf_prior_set *s);
/* A copy of s (names, supports, priors). Errors: TF_ERR_NOMEM; on failure *out is NULL. */
tf_status tf_prior_set_copy(const tf_prior_set *s, tf_prior_set **out, tf_error *err);

size_t tf_prior_set_n_params(const tf_prior_set *s);
const char *tf_prior_set_name(const tf_prior_set *s, size_t i);
/* Index of a named parameter, or -1. */
int tf_prior_set_index(const tf_prior_set *s, const char *name);

/* Gives the parameter called name the prior *p (copied; a later call replaces it). Errors,
 * leaving the set unchanged: TF_ERR_INVALID when the set has no such parameter, or when the
 * prior's support reaches outside the model's support for it (the hint says how to truncate). */
tf_status tf_prior_set_assign(tf_prior_set *s, const char *name, const tf_prior *p, tf_error *err);
/* The prior of parameter i, or NULL when none has been assigned (or i is out of range). */
const tf_prior *tf_prior_set_prior(const tf_prior_set *s, size_t i);
/* TF_OK when every parameter has a prior; else one TF_ERR_INVALID message per missing one. */
tf_status tf_prior_set_check_complete(const tf_prior_set *s, tf_error *err);

/* Sum of the log prior densities of theta[0..n_params) on the natural scale: -INFINITY when
 * any value is outside its prior's support; NaN when a parameter has no prior yet. */
double tf_prior_set_log_density(const tf_prior_set *s, const double *theta);
/* Fills theta[0..n_params) with one draw from each prior, in parameter order (requires a
 * complete set; parameters without a prior get NaN). */
void tf_prior_set_draw(const tf_prior_set *s, tf_rng *rng, double *theta);

#endif
