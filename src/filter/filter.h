/* Bootstrap particle filter (Gordon, Salmond & Smith 1993) for one series under one joined model:
 * an unbiased estimate of the likelihood, computed in log space, with systematic resampling
 * (Kitagawa 1996), optionally returning one state trajectory drawn from the smoothing ancestry. */
#ifndef TF_FILTER_H
#define TF_FILTER_H

#include <stddef.h>

#include "model/model.h"
#include "survey/series.h"
#include "util/rng.h"

/* Per-chain workspace, allocated once; not shared between threads. */
typedef struct tf_filter tf_filter;

/* Borrows m and s (they must outlive the filter). NULL when out of memory or n_particles == 0 (or
 * >= 2^32 - 1). Holds about 12 n_particles n_years bytes for the trajectory plus 80 n_particles
 * bytes of per-year buffers. The model's first-year prior is read at each call, so
 * tf_model_set_initial may be called between calls. */
tf_filter *tf_filter_alloc(const tf_model *m, const tf_series *s, size_t n_particles);
void tf_filter_free(tf_filter *f);   /* accepts NULL */
size_t tf_filter_n_particles(const tf_filter *f);

/* Log of the likelihood estimate p^(y | theta), theta in model order on the natural scale.
 * Draws from rng. If path is non-NULL it receives n_years log-abundances: one trajectory drawn
 * from the final particle weights by tracing ancestors. Returns -INFINITY (never NaN) when a step
 * is degenerate (every weight zero, overflow) or theta is outside the support; path is then
 * unspecified. */
double tf_filter_loglik(tf_filter *f, const double *theta, tf_rng *rng, double *path);

/* Fixed-random-number mode, for the correlated pseudo-marginal method (Deligiannidis, Doucet &
 * Pitt 2018). Every random number comes from the caller's buffers of standard normals:
 * z_move (tf_filter_n_move(f) values: the process noise, and the first year's draw) and
 * z_pick (tf_filter_n_pick(f) values: one per resampling step and one for the path, mapped to
 * uniforms by the normal CDF). Particles are sorted by state before resampling so that the
 * estimate is smooth in the random numbers. Same return contract as tf_filter_loglik.
 * Layout: n_move = n_years * n_particles; z_move[i] draws particle i of the first year and
 * z_move[t * n_particles + j] is the noise of slot j moving into year t (t >= 1).
 * n_pick = n_years; z_pick[t] drives the resampling after year t (t < n_years - 1; ignored for a
 * year not surveyed) and z_pick[n_years - 1] picks the path. The buffers are only read. */
size_t tf_filter_n_move(const tf_filter *f);
size_t tf_filter_n_pick(const tf_filter *f);
double tf_filter_loglik_fixed(tf_filter *f, const double *theta, const double *z_move,
                              const double *z_pick, double *path);

#endif
