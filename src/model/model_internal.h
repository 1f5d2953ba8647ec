/* The rows of the model table (registry.c) and helpers shared by the model files; not for use
 * outside src/model. */
#ifndef TF_MODEL_INTERNAL_H
#define TF_MODEL_INTERNAL_H

#include <math.h>
#include <stddef.h>

#include <gsl/gsl_rng.h>

#include "model/model.h"

extern const tf_growth_type tf_growth_exponential;
extern const tf_growth_type tf_growth_ricker;
extern const tf_growth_type tf_growth_gompertz;
extern const tf_growth_type tf_growth_theta_logistic;

extern const tf_obs_type tf_obs_poisson;
extern const tf_obs_type tf_obs_lognormal;
extern const tf_obs_type tf_obs_negbin;
extern const tf_obs_type tf_obs_lognormal_int;

/* A Poisson count with mean lambda >= 0 (finite), safe for lambda beyond the unsigned range of
 * gsl_ran_poisson (obs_poisson.c). */
double tf_obs_poisson_count(double lambda, gsl_rng *rng);

#endif
