/* Importance densities on the unconstrained parameter space: finite mixtures of multivariate
 * Student-t distributions, with their log density, draws, and a fit of one component's centre
 * and scale to weighted points. */
#ifndef TF_TMIX_H
#define TF_TMIX_H

#include <stddef.h>

#include "util/error.h"
#include "util/rng.h"

/* The most dimensions and components a mixture holds. */
#define TF_TMIX_MAX_DIM 16
#define TF_TMIX_MAX_COMP 8

/* A mixture sum_c w_c t_nu_c(mean_c, scale_c): a small value type (no allocation) so that
 * worker threads can share one read-only copy. Fill it with tf_tmix_init and tf_tmix_set. */
typedef struct {
    size_t dim, n_comp;
    double log_w[TF_TMIX_MAX_COMP];     /* log mixture weights, summing to 1 */
    double nu[TF_TMIX_MAX_COMP];        /* degrees of freedom */
    double mean[TF_TMIX_MAX_COMP][TF_TMIX_MAX_DIM];
    /* Lower Cholesky factor L of the scale matrix, Sigma = L L' (row-major dim x dim). */
    double chol[TF_TMIX_MAX_COMP][TF_TMIX_MAX_DIM * TF_TMIX_MAX_DIM];
    /* log Gamma((nu + d)/2) - log Gamma(nu/2) - (d/2) log(nu pi) - log|L|. */
    double log_norm[TF_TMIX_MAX_COMP];
} tf_tmix;

/* Empties q for dim dimensions (1 .. TF_TMIX_MAX_DIM). TF_ERR_INVALID for another dim. */
tf_status tf_tmix_init(tf_tmix *q, size_t dim, tf_error *err);

/* Appends the component weight * t_nu(mean, scale * cov): mean (dim values), cov (dim x dim,
 * row-major, symmetric positive definite) multiplied by scale > 0. The weights of all
 * components must add up to 1 (checked by tf_tmix_check). Errors: TF_ERR_INVALID for a full
 * mixture, weight outside (0, 1], nu <= 0 or not finite, scale <= 0; TF_ERR_NUMERIC when cov is
 * not positive definite. q is unchanged on error. */
tf_status tf_tmix_add(tf_tmix *q, double weight, double nu, const double *mean, const double *cov,
                      double scale, tf_error *err);

/* TF_ERR_INVALID unless q has a component and its weights sum to 1 within 1e-9. */
tf_status tf_tmix_check(const tf_tmix *q, tf_error *err);

/* Log density of the mixture at z (log-sum-exp over components); never NaN for finite z. */
double tf_tmix_log_density(const tf_tmix *q, const double *z);

/* One draw into z: a component by its weight, then mean + L g sqrt(nu / W) with g standard
 * normal and W ~ chi-square(nu) (the normal / chi-square representation of the multivariate t,
 * Kotz & Nadarajah 2004, Multivariate t Distributions and Their Applications, chapter 1;
 * recalled from memory). The chi-square comes from GSL's gsl_ran_chisq on the stream. */
void tf_tmix_draw(const tf_tmix *q, tf_rng *rng, double *z);

/* Appends every component of src to q: its weight multiplied by factor (0 < factor <= 1), its
 * scale matrix by scale, its degrees of freedom replaced by nu (0 keeps them). Errors as
 * tf_tmix_add (q is then left with the components appended before the failure). */
tf_status tf_tmix_append(tf_tmix *q, const tf_tmix *src, double factor, double nu, double scale, tf_error *err);

/* Fits a mixture of n_comp Student-t components with nu degrees of freedom (fixed) to the
 * points z (n x q->dim, row-major) with weights w >= 0 (NULL = all 1) by the EM algorithm
 * for t mixtures (Peel & McLachlan 2000, "Robust mixture modelling using the t distribution",
 * Statistics and Computing 10:339, section 4, the steps for known nu), at most n_iter
 * iterations, stopping when the weighted log-likelihood gains less than 1e-9 of its size.
 * warm = 1 starts from the n_comp components q holds (they must have that count); warm = 0
 * seeds the centres by k-means++ (Arthur & Vassilvitskii 2007, SODA, section 2.2) in the
 * Mahalanobis metric of all points, drawing from rng, and starts every scale at the points'
 * covariance divided by n_comp^(2/dim). Each scale matrix gets 1e-6 of the points' variances
 * added to its diagonal so that no component collapses onto a few points. q receives the fit.
 * Errors: TF_ERR_INVALID (bad sizes, all weights 0), TF_ERR_NOMEM, TF_ERR_NUMERIC (a scale
 * matrix not positive definite); q is unchanged on error. */
tf_status tf_tmix_fit(tf_tmix *q, int warm, const double *z, const double *w, size_t n, size_t n_comp, double nu,
                      size_t n_iter, tf_rng *rng, tf_error *err);

/* Weighted mean and covariance of n points z (n x dim, row-major) with weights w >= 0 (not all
 * 0; normalised here): the moments a fitted component takes. mean gets dim values, cov
 * dim x dim. Returns the Kish effective sample size (sum w)^2 / sum w^2, 0 when every weight is
 * 0 (then mean and cov are left unchanged). */
double tf_tmix_weighted_moments(const double *z, const double *w, size_t n, size_t dim, double *mean,
                                double *cov);

#endif
