/* Convergence diagnostics of MCMC draws of one parameter: rank-normalised split R-hat, bulk and
 * tail effective sample sizes and Monte Carlo standard errors, after Vehtari, Gelman, Simpson,
 * Carpenter & Buerkner (2021), "Rank-normalization, folding, and localization: an improved R-hat
 * for assessing convergence of MCMC", Bayesian Analysis 16(2):667-718. */
#ifndef TF_DIAGNOSTICS_H
#define TF_DIAGNOSTICS_H

#include <stddef.h>

#include "util/error.h"

/* Scratch memory for up to max_chains chains of up to max_iter draws, allocated once and reused
 * for every parameter (and every fit of the same or smaller size). One workspace per thread. */
typedef struct tf_diag_workspace tf_diag_workspace;

/* The smallest chain length the diagnostics accept: each half of a split chain needs two draws
 * for a variance. */
#define TF_DIAG_MIN_ITER 4

/* Allocates a workspace; max_chains >= 1, max_iter >= TF_DIAG_MIN_ITER. Errors: TF_ERR_INVALID
 * for smaller sizes or sizes whose memory would overflow, TF_ERR_NOMEM. The caller frees *out
 * with tf_diag_workspace_free; on failure *out is NULL. */
tf_status tf_diag_workspace_alloc(size_t max_chains, size_t max_iter, tf_diag_workspace **out, tf_error *err);
void tf_diag_workspace_free(tf_diag_workspace *w);

/* Everything computed for one parameter. A value that is undefined for these draws (for example
 * every ESS and R-hat when all draws are equal) is NaN. */
typedef struct {
    size_t n_chains, n_iter;
    double mean, sd;         /* over all draws; sd with divisor n - 1 */
    double q05, q50, q95;    /* sample quantiles (linear interpolation between order statistics) */
    double rhat;             /* max(rhat_bulk, rhat_folded): the one the paper says to report */
    double rhat_bulk;        /* split R-hat of the rank-normalised draws */
    double rhat_folded;      /* split R-hat of the rank-normalised folded draws |x - median| */
    double ess_bulk;         /* ESS of the rank-normalised split chains */
    double ess_tail;         /* min ESS of the indicators I(x <= q05) and I(x <= q95) */
    double ess_mean;         /* ESS of the draws themselves (split chains), for the MCSE of the mean */
    double mcse_mean;        /* sd / sqrt(ess_mean) */
    double mcse_q05, mcse_q50, mcse_q95; /* MCSE of the quantiles, from the indicator ESS */
} tf_diag_summary;

/* Diagnoses n_chains chains of n_iter draws of one parameter. Draw i of chain c is
 * chains[c][i * stride]: stride 1 for contiguous chains, or the number of parameters when a
 * chain stores whole parameter vectors one after another (then chains[c] points at the
 * parameter's first value). Nothing is copied out of w afterwards; out is filled.
 * Errors: TF_ERR_INVALID for n_chains = 0, n_iter < TF_DIAG_MIN_ITER, stride = 0, sizes above
 * the workspace's, or a non-finite draw (named by chain and iteration); out is then all NaN. */
tf_status tf_diag_summarise(tf_diag_workspace *w, const double *const *chains, size_t n_chains, size_t n_iter,
                            size_t stride, tf_diag_summary *out, tf_error *err);

#endif
