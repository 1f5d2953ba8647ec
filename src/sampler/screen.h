/* The cheap screening likelihood of delayed acceptance (pmmh.c): an extended Kalman filter on
 * log-abundance, fed with each count's Gaussian pseudo-observation (tf_obs_type.pseudo_obs), so
 * that a proposal costs O(years) arithmetic instead of a particle filter run. */
#ifndef TF_SCREEN_H
#define TF_SCREEN_H

#include "model/model.h"
#include "survey/series.h"

typedef struct tf_screen tf_screen;

/* For model m and series s (both borrowed; they must outlive the screen). NULL when out of
 * memory. */
tf_screen *tf_screen_alloc(const tf_model *m, const tf_series *s);
void tf_screen_free(tf_screen *sc);   /* accepts NULL */

/* An approximation of log p(y | theta) (theta: the model's full parameter vector, natural
 * scale). It is a deterministic function of theta, as delayed acceptance needs; its accuracy
 * only changes how often the particle filter runs, never what the chain samples. Always finite
 * for parameters inside the supports: where the filter's arithmetic fails, a very low finite
 * value (TF_SCREEN_FLOOR) stands in. -INFINITY only for parameters outside the supports. */
double tf_screen_loglik(tf_screen *sc, const double *theta);

/* The stand-in value; delayed acceptance stays exact with any positive screening function, and
 * the floor keeps it positive (see screen.c). */
#define TF_SCREEN_FLOOR (-1e6)

#endif
