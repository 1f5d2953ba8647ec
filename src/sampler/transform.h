/* Maps between a parameter's natural scale, with support (a, b), and the unconstrained real line
 * the sampler moves on, with the log Jacobian that keeps densities correct under the change of
 * variables. */
#ifndef TF_TRANSFORM_H
#define TF_TRANSFORM_H

#include <stddef.h>

#include "util/error.h"

typedef enum {
    TF_TRANSFORM_IDENTITY, /* (-inf, inf):  u = x */
    TF_TRANSFORM_LOWER,    /* (a, inf):     u = log(x - a) */
    TF_TRANSFORM_UPPER,    /* (-inf, b):    u = log(b - x)  (u grows as x falls) */
    TF_TRANSFORM_INTERVAL  /* (a, b):       u = logit((x - a) / (b - a)) */
} tf_transform_kind;

/* A small value type: fill it with tf_transform_init and treat the fields as read-only. */
typedef struct {
    tf_transform_kind kind;
    double lower, upper;
} tf_transform;

/* Picks the transform for support (lower, upper); either end may be infinite (-INFINITY /
 * INFINITY). TF_ERR_INVALID (t left unusable) for NaN ends, lower >= upper, lower = +inf or
 * upper = -inf. */
tf_status tf_transform_init(tf_transform *t, double lower, double upper, tf_error *err);

/* Natural x -> unconstrained u. At a finite end of the support u is -inf or +inf; outside the
 * support NaN. */
double tf_transform_forward(const tf_transform *t, double x);
/* Unconstrained u -> natural x, inside the support for every finite u (up to rounding, which
 * can give an end of the support itself when |u| is very large). */
double tf_transform_inverse(const tf_transform *t, double u);
/* log |dx/du| at u: add it to the natural-scale log density to get the density of u. */
double tf_transform_log_jacobian(const tf_transform *t, double u);

/* The same for a vector of n parameters, transform t[i] for element i: x[i] = inverse(u[i]);
 * returns the sum of the log Jacobians. x and u may not overlap. */
double tf_transform_to_natural(const tf_transform *t, size_t n, const double *u, double *x);
/* u[i] = forward(x[i]) for i < n. */
void tf_transform_to_unconstrained(const tf_transform *t, size_t n, const double *x, double *u);

#endif
