/* The prior side of the sampler's target on the unconstrained scale: a model's parameters, each
 * with its prior and its transform to the real line, joined into one log density of z
 * (log prior of theta(z) plus log|d theta / d z|). */
#ifndef TF_POSTERIOR_H
#define TF_POSTERIOR_H

#include <stddef.h>

#include "model/model.h"
#include "model/prior.h"
#include "sampler/transform.h"
#include "util/error.h"
#include "util/rng.h"

typedef struct tf_posterior tf_posterior;

/* Joins model m with priors (one per parameter, in model order; both borrowed and must outlive
 * the result). Errors: TF_ERR_NOMEM; TF_ERR_INVALID when the priors do not match the model's
 * parameters or a prior's support leaves the parameter's. */
tf_status tf_posterior_new(const tf_model *m, const tf_prior_set *priors, tf_posterior **out,
                           tf_error *err);
void tf_posterior_free(tf_posterior *p);   /* accepts NULL */

size_t tf_posterior_dim(const tf_posterior *p);
const tf_model *tf_posterior_model(const tf_posterior *p);
const tf_prior_set *tf_posterior_priors(const tf_posterior *p);

/* Writes theta(z) (natural scale) and returns log prior(theta) + log|Jacobian|; -INFINITY when
 * theta falls outside a prior's support (e.g. at the edge of floating point). */
double tf_posterior_log_prior_z(const tf_posterior *p, const double *z, double *theta);

/* Log prior density of theta on the natural scale (no Jacobian); -INFINITY outside. */
double tf_posterior_log_prior(const tf_posterior *p, const double *theta);

/* z of a natural-scale theta; 0 when theta is outside the support (then z is unspecified). */
int tf_posterior_to_z(const tf_posterior *p, const double *theta, double *z);

/* A draw from the prior, written both as theta and as z. */
void tf_posterior_draw(const tf_posterior *p, tf_rng *rng, double *theta, double *z);

#endif
