/* Particle filter for one series under one joined model: an unbiased estimate of the likelihood,
 * computed in log space, with systematic resampling (Kitagawa 1996), optionally returning one
 * state trajectory drawn from the smoothing ancestry. Two proposals: guided (the default; an
 * auxiliary particle filter that looks at each year's count before it moves, Pitt & Shephard
 * 1999) and bootstrap (moves by the growth model alone; Gordon, Salmond & Smith 1993). */
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

/* How particles move. Guided: look-ahead resampling and moves from the product of the growth step
 * and the count's Gaussian pseudo-observation (tf_obs_type.pseudo_obs), far fewer particles for
 * the same precision when counts are large. Bootstrap: the growth step alone, for checks and
 * comparisons. A zero-initialised option is guided. */
typedef enum { TF_PROPOSAL_GUIDED = 0, TF_PROPOSAL_BOOTSTRAP = 1 } tf_proposal;

/* A new filter is guided; the proposal may be changed between calls (f NULL: nothing). */
void tf_filter_set_proposal(tf_filter *f, tf_proposal p);
tf_proposal tf_filter_proposal(const tf_filter *f);
/* "guided" or "bootstrap" (static strings). */
const char *tf_filter_proposal_name(tf_proposal p);
/* Parses "guided" or "bootstrap" into *out: 1 on success, 0 (out untouched) otherwise. */
int tf_filter_proposal_parse(const char *name, tf_proposal *out);

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
 * n_pick = n_years; z_pick[t] drives the resampling between years t and t + 1 (t < n_years - 1;
 * ignored when there is none) and z_pick[n_years - 1] picks the path. The buffers are only read. */
size_t tf_filter_n_move(const tf_filter *f);
size_t tf_filter_n_pick(const tf_filter *f);
double tf_filter_loglik_fixed(tf_filter *f, const double *theta, const double *z_move,
                              const double *z_pick, double *path);

#endif
