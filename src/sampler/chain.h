/* One pseudo-marginal Metropolis-Hastings chain (PMMH, Andrieu, Doucet & Holenstein 2010) on an
 * unconstrained parameter space, with an adaptive Gaussian random-walk proposal (Haario, Saksman &
 * Tamminen 2001) and optionally correlated likelihood estimates (Deligiannidis, Doucet & Pitt 2018).
 * The caller runs the loop: tf_chain_init once, then tf_chain_step as often as it likes, switching
 * adaptation off (tf_chain_set_adapt) before the draws it keeps. */
#ifndef TF_CHAIN_H
#define TF_CHAIN_H

#include <stddef.h>

#include "util/error.h"
#include "util/rng.h"

/* The most parameters a chain moves. */
#define TF_CHAIN_MAX_DIM 16

/* What a chain samples: target density on the unconstrained scale z,
 *   log pi(z) = log_lik(theta(z)) + log_prior(z),
 * where log_lik is an estimate (noisy, unbiased on the natural scale) and log_prior already holds
 * the log|Jacobian| of z -> theta. The chain calls these from one thread only; ctx belongs to
 * the chain's caller and must outlive the chain. */
typedef struct {
    size_t dim;     /* 1 .. TF_CHAIN_MAX_DIM */
    size_t n_aux;   /* standard normals each estimate is a function of; 0 = the estimate draws
                     * from rng (standard pseudo-marginal) */
    size_t n_path;  /* values of the latent path returned with each estimate; 0 = none */
    void *ctx;
    /* Writes theta (dim values, natural scale) for z and returns the log prior density of z
     * including the Jacobian term; -INFINITY when z maps outside the support. */
    double (*log_prior)(void *ctx, const double *z, double *theta);
    /* Log of the likelihood estimate at theta. aux is NULL when n_aux == 0; path is NULL when
     * n_path == 0, else it receives n_path values. -INFINITY, +INFINITY or NaN make the chain
     * reject the point. */
    double (*log_lik)(void *ctx, const double *theta, const double *aux, tf_rng *rng,
                      double *path);
    /* Optional (NULL = off): delayed acceptance (Christen & Fox 2005, J. Comput. Graph. Stat.
     * 14:795; Golightly, Henderson & Sherlock 2015, Statistics and Computing 25:1039). A cheap,
     * deterministic approximation s(theta) of the log-likelihood, finite wherever the prior is
     * positive. Each proposal is first screened with s: accepted with probability
     * min(1, exp(s' + prior' - s - prior)); only then is log_lik estimated, and the proposal
     * accepted with probability tf_chain_delayed_alpha2. The product of the two is reversible
     * with respect to the same target as without screening, so the chain stays exact. */
    double (*log_screen)(void *ctx, const double *theta);
} tf_chain_target;

/* The second stage's log acceptance probability of delayed acceptance, for estimates ll and
 * screening values s at the proposed (new) and current (cur) points:
 *   min(0, (ll_new - ll_cur) - (s_new - s_cur)),
 * the ratio of the estimated likelihoods corrected by the ratio of the screening values that the
 * first stage already accepted on (Christen & Fox 2005, eq. 2). */
double tf_chain_delayed_log_alpha2(double ll_new, double ll_cur, double s_new, double s_cur);

typedef struct {
    /* Correlation of successive auxiliary normals, u' = rho u + sqrt(1 - rho^2) eps
     * (Deligiannidis et al. 2018, section 2.2); used only when n_aux > 0. 0 <= rho < 1. */
    double rho;
    /* Weight, in pseudo-draws, of the initial proposal covariance in the adapted one: the
     * adapted covariance is (w C0 + t S_t) / (w + t) with S_t the running covariance of the t
     * draws seen while adapting. Blending avoids an abrupt switch at a fixed time t0. */
    double init_weight;
    /* epsilon of Haario et al. (2001, eq. 2.1) in C_t = s_d (Cov + epsilon I). */
    double regulariser;
    /* s_d; 0 selects 2.38^2 / d (Roberts, Gelman & Gilks 1997; Haario et al. 2001 section 2). */
    double scale;
    /* When > 0, adaptation also tunes a global factor lambda on s_d towards this acceptance
     * rate by stochastic approximation (Andrieu & Thoms 2008, Statistics and Computing 18:343,
     * Algorithm 4). 0 = off: the scale stays s_d. */
    double target_accept;
} tf_chain_options;

/* rho 0, init_weight 100, regulariser 1e-8, scale 0 (= 2.38^2/d), target_accept 0. */
tf_chain_options tf_chain_default_options(void);

typedef struct tf_chain tf_chain;

/* Allocates the chain's buffers for target t (copied; t->ctx is borrowed). opt may be NULL for
 * the defaults. NULL when out of memory or when t or opt is unusable (dim 0 or too large,
 * missing callbacks, rho outside [0, 1)). */
tf_chain *tf_chain_alloc(const tf_chain_target *t, const tf_chain_options *opt);
void tf_chain_free(tf_chain *c);   /* accepts NULL */

/* Starts the chain at z0 with its own random stream rng (copied) and an initial proposal
 * covariance prop_cov (dim x dim, row-major, without the s_d factor; symmetric positive
 * definite). Draws the first auxiliary normals and the first likelihood estimate. Adaptation is
 * on and the counters are zero afterwards.
 * Errors: TF_ERR_INVALID when prop_cov is not positive definite; TF_ERR_NUMERIC when the prior
 * or the likelihood estimate at z0 is not finite (the chain is then unusable until a later
 * successful init). */
tf_status tf_chain_init(tf_chain *c, const double *z0, const double *prop_cov, const tf_rng *rng,
                        tf_error *err);

/* One Metropolis-Hastings step. Returns 1 when the proposal was accepted, 0 when not. */
int tf_chain_step(tf_chain *c);

/* While on (the default after init), every step updates the running mean and covariance of the
 * draws and the proposal follows them. Turn it off before the kept draws: then the proposal is
 * fixed and the chain is a valid Markov chain for the target. */
void tf_chain_set_adapt(tf_chain *c, int on);

/* Monte Carlo within Metropolis (O'Neill, Balding, Becker, Eerola & Mollison 2000, Applied
 * Statistics 49:517; Beaumont 2003, Genetics 164:1139): while on, each step first re-estimates
 * the likelihood at the current point. Its stationary law only approximates the posterior, but
 * it cannot stick at one lucky over-estimate, which makes it a safe way to walk from a poor
 * start towards the posterior before the exact chain is run. Off after init; has no effect when
 * the target has auxiliary normals. */
void tf_chain_set_refresh(tf_chain *c, int on);

/* Resets the step, acceptance, invalid and screened counters (e.g. at the end of warm-up). */
void tf_chain_reset_counts(tf_chain *c);

/* Current state; pointers borrowed from the chain, valid until the next step or init. */
size_t tf_chain_dim(const tf_chain *c);
const double *tf_chain_z(const tf_chain *c);       /* unconstrained */
const double *tf_chain_theta(const tf_chain *c);   /* natural scale */
const double *tf_chain_path(const tf_chain *c);    /* NULL when n_path == 0 */
double tf_chain_loglik(const tf_chain *c);         /* the estimate held with the state */
double tf_chain_logprior(const tf_chain *c);
size_t tf_chain_n_steps(const tf_chain *c);
size_t tf_chain_n_accepted(const tf_chain *c);
/* Steps that were rejected because the estimate was not finite (or the prior was zero). */
size_t tf_chain_n_invalid(const tf_chain *c);
/* Steps whose proposal the screen rejected, so that no likelihood was estimated (0 without
 * log_screen). */
size_t tf_chain_n_screened(const tf_chain *c);
/* The proposal covariance in use, without the s_d factor (dim x dim, row-major), e.g. to start
 * another chain with it. */
void tf_chain_proposal_cov(const tf_chain *c, double *out);
/* The global scale factor lambda (1 unless target_accept > 0). */
double tf_chain_scale_factor(const tf_chain *c);
/* The chain's random stream as it is now (e.g. to carry it over into another chain). */
tf_rng tf_chain_rng(const tf_chain *c);

#endif
