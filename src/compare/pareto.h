/* The Pareto-k diagnostic of importance weights: the shape of a generalized Pareto distribution
 * fitted to the largest weights, which says how heavy their right tail is and so whether an
 * importance-sampling estimate can be trusted (Vehtari, Simpson, Gelman, Yao & Gabry, "Pareto
 * smoothed importance sampling", arXiv:1507.02646, 2015; JMLR 25(72), 2024). */
#ifndef TF_PARETO_H
#define TF_PARETO_H

#include <stddef.h>

#include "util/error.h"

/* Above this k the importance-sampling estimate is unreliable: the weights' variance is
 * infinite and their mean converges too slowly to be of use (Vehtari et al.:
 * k < 0.5 good, 0.5 - 0.7 usable, > 0.7 unreliable; thresholds recalled from memory). */
#define TF_PARETO_K_MAX 0.7

/* Fewest tail values a shape is estimated from; with fewer the result is NaN. */
#define TF_PARETO_MIN_TAIL 5

/* Fits a generalized Pareto distribution with location 0 to the n values x[0..n) (exceedances
 * of a threshold, all >= 0; any order) by the method of Zhang & Stephens (2009, "A new and
 * efficient estimation method for the generalized Pareto distribution", Technometrics 51:316,
 * section 3), with the weakly informative prior of Vehtari et al. that pulls k towards 0.5 with
 * the weight of 10 observations (recalled from memory). Writes the shape *k (the tail index: the
 * distribution has moments of order below 1/k) and the scale *sigma. x is left unchanged; work
 * has room for n doubles. *k and *sigma are NaN when n < TF_PARETO_MIN_TAIL or the values are
 * degenerate (all equal, negative or not finite). */
void tf_pareto_fit(const double *x, size_t n, double *work, double *k, double *sigma);

/* The number of largest weights the tail fit uses out of n_draws:
 * min(n_draws / 5, 3 sqrt(n_draws)) (Vehtari et al.; recalled from memory). */
size_t tf_pareto_tail_size(size_t n_draws);

/* Pareto k of the importance weights exp(log_w[0..n)) (-inf = weight 0): the fit above to the
 * tf_pareto_tail_size(n) largest weights minus the next largest one. Scale-free, so the
 * weights may be given up to a constant. Writes *k (NaN when too few weights are positive) and
 * *n_tail (the tail size used). Errors: TF_ERR_NOMEM (then *k is NaN). */
tf_status tf_pareto_k(const double *log_w, size_t n, double *k, size_t *n_tail, tf_error *err);

#endif
