/* The marginal likelihood (evidence) p(y | model) of a fitted model, estimated by importance
 * sampling squared (Tran, Scharth, Pitt & Kohn 2014, "Importance sampling squared for Bayesian
 * inference in latent variable models", arXiv:1309.3339): importance sampling over the
 * unconstrained parameters z with a heavy-tailed density fitted to the PMMH draws, each weight
 * using the particle filter's unbiased likelihood estimate in place of the likelihood, so the
 * mean weight is an unbiased estimate of p(y). A second, differently shaped importance density
 * checks the first, and the Pareto-k of the weights says whether either can be trusted. */
#ifndef TF_EVIDENCE_H
#define TF_EVIDENCE_H

#include <signal.h>
#include <stddef.h>
#include <stdint.h>

#include "filter/filter.h"
#include "sampler/fit.h"
#include "sampler/posterior.h"
#include "survey/series.h"
#include "util/error.h"
#include "util/rng.h"

/* The two estimates disagree when they differ by more than this many standard errors of their
 * difference (about 3 in 1000 for two correct estimates with normal errors). */
#define TF_EVIDENCE_Z_MAX 3.0

typedef struct {
    /* Importance draws per density for the reported estimates: by need, in fixed blocks, until
     * the estimate's standard error is at most target_se, from min_draws up to n_draws (>= 100);
     * target_se = 0 always takes n_draws. The blocks are decided on whole, from the weights
     * only, so the number of draws does not depend on the thread count either. */
    size_t n_draws;
    size_t min_draws;
    double target_se;
    /* Adaptation: rounds of n_adapt_draws draws each (0 = none), each refitting the centre and
     * scale of the main component to the weighted draws of the round before. */
    size_t n_adapt_rounds;
    size_t n_adapt_draws;
    /* Main density: (1 - defensive_weight) F + defensive_weight t_nu(m0, defensive_scale S0),
     * F a mixture of up to n_components t_nu components fitted by EM to the PMMH draws (and
     * refitted to the weighted draws of each adaptation round), m0 and S0 the draws' mean and
     * covariance. The wide component bounds the weights where F is too narrow (defensive
     * importance sampling, Hesterberg 1995, Technometrics 37:185). */
    double nu;
    size_t n_components;
    double defensive_weight;
    double defensive_scale;
    /* Check density, never adapted: F as first fitted, with check_nu degrees of freedom and its
     * scales times check_scale, and the defensive part centred on the coordinate-wise median of
     * the draws instead of their mean. */
    double check_nu;
    double check_scale;
    /* Base particle count n0; 0 = chosen by tf_tune_particles at points of the posterior so
     * that the log-estimate's sd is about target_sd there, starting from the fit's count. Each
     * importance draw then uses n0 2^L particles, L set by a pilot at that draw so that its sd
     * is about target_sd too (see evidence.c). */
    size_t n_particles;
    double target_sd;
    tf_proposal proposal;  /* the particle filter's (filter.h); guided when zero-initialised */
    size_t n_threads;   /* >= 1; the results do not depend on it */
    uint64_t seed;
} tf_evidence_options;

/* 512 to 8000 draws per density until the standard error of log p(y) is at most 0.05, 3 rounds
 * of 400 to adapt, 3 components of nu 5 with 20 % defensive
 * weight at 9 times the covariance, check density nu 3 at 1.5 times the scales, target sd 1
 * (see evidence.c for the reasons), one thread, seed 1. */
tf_evidence_options tf_evidence_default_options(void);

/* One importance-sampling estimate. */
typedef struct {
    double log_ml;      /* log of the mean weight */
    double se;          /* its delta-method standard error, sd(w) / (sqrt(M) mean(w)) */
    double pareto_k;    /* of the weights (compare/pareto.h); NaN when too few are positive */
    double ess;         /* (sum w)^2 / sum w^2 */
    size_t n_draws;
    size_t n_zero;      /* draws with weight 0: outside the prior's support or an estimate of 0 */
} tf_evidence_estimate;

/* The result: a small value type (nothing to free). */
typedef struct {
    tf_evidence_estimate main;    /* the adapted density: the estimate to report */
    tf_evidence_estimate check;   /* the check density */
    double z_diff;                /* (main - check) / sqrt(se_main^2 + se_check^2) */
    int agree;                    /* |z_diff| <= TF_EVIDENCE_Z_MAX */
    int reliable;                 /* both Pareto k finite and <= TF_PARETO_K_MAX */
    size_t n_particles;           /* base particle count n0 of the likelihood estimates */
    double mean_particles;        /* particles spent per importance draw, pilots included
                                   * (tf_evidence_estimate_fit; NaN from tf_evidence_run) */
    double loglik_sd;             /* sd of the log-likelihood estimate at the centre (NaN if
                                   * not measured) */
    size_t n_adapt_used;          /* adaptation rounds that refitted the density */
    size_t n_components;          /* t components fitted (besides the defensive one) */
} tf_evidence;

/* The importance draws of the main density, kept so that the estimate can be redone under
 * another prior without a single new likelihood estimate (tf_evidence_reweight). Opaque; made
 * empty by tf_evidence_draws_new and filled by a run that is handed it. */
typedef struct tf_evidence_draws tf_evidence_draws;

/* What is integrated: p(y) = integral of exp(log_lik(theta(z)) + log_prior(z)) dz. log_prior
 * writes theta(z) and returns the log prior density of z with the Jacobian (as
 * tf_posterior_log_prior_z; -inf outside the support). log_lik returns the log of an
 * unbiased, non-negative estimate of the likelihood at theta (-inf for 0), drawing from rng;
 * it runs on a per-thread worker made by worker_new(ctx) (NULL = out of memory) and freed by
 * worker_free. log_prior is called from several threads at once and must not write to ctx; worker_free is
 * called from the thread that called tf_evidence_run once every draw is done. */
typedef struct {
    size_t dim;
    void *ctx;
    double (*log_prior)(void *ctx, const double *z, double *theta);
    void *(*worker_new)(void *ctx);
    void (*worker_free)(void *worker);
    double (*log_lik)(void *worker, const double *theta, tf_rng *rng);
    /* When not NULL, the run stores here every draw of the main density: theta, the log
     * likelihood estimate, log q(z) and the log prior of z (replacing what it held). */
    tf_evidence_draws *keep;
} tf_evidence_target;

/* Estimates the evidence of target t from n_z draws z_draws (n_z x dim, row-major) of its
 * posterior on the unconstrained scale (n_z >= 2 dim + 2; they set the importance densities).
 * Every random number comes from streams tf_rng_derive(opt->seed, {keys..., stage, block}) for
 * fixed blocks of draws, so the result is the same for any opt->n_threads. keys (n_keys <= 6)
 * name the model and population. opt->n_particles and opt->target_sd are not used here (the
 * target's log_lik decides its own accuracy); out->n_particles is left 0, mean_particles and
 * loglik_sd NaN.
 * stop (may be NULL) is polled between blocks. Errors: TF_ERR_INVALID for bad options or too
 * few draws; TF_ERR_NUMERIC when the draws' covariance is singular or every weight is zero;
 * TF_ERR_NOMEM; TF_ERR_INTERRUPTED. *out is complete only on TF_OK. */
tf_status tf_evidence_run(const tf_evidence_target *t, const double *z_draws, size_t n_z,
                          const tf_evidence_options *opt, const uint64_t *keys, size_t n_keys,
                          const volatile sig_atomic_t *stop, tf_evidence *out, tf_error *err);

/* The evidence of the model of post (model and priors) for series s from its PMMH fit: the
 * fit's draws mapped to z, the particle filter as log_lik, streams keyed by the population label
 * and the model name. Chooses the particle count as opt->n_particles says. Borrows everything.
 * Errors as tf_evidence_run, and TF_ERR_INVALID when the fit is of another model or series. */
tf_status tf_evidence_estimate_fit(const tf_posterior *post, const tf_series *s, const tf_fit *fit,
                                   const tf_evidence_options *opt, const volatile sig_atomic_t *stop,
                                   tf_evidence *out, tf_error *err);
/* The same, keeping the main density's draws in keep (may be NULL) as tf_evidence_target's keep. */
tf_status tf_evidence_estimate_fit_kept(const tf_posterior *post, const tf_series *s, const tf_fit *fit,
                                        const tf_evidence_options *opt, const volatile sig_atomic_t *stop,
                                        tf_evidence *out, tf_evidence_draws *keep, tf_error *err);

/* ---- the same draws under another prior ----
 *
 * The estimate is the mean of w = p_hat(y | theta) p(theta) / q(theta) over draws from q. Under
 * another prior p' of the same parameters the very same draws give
 *     w' = w p'(theta) / p(theta),
 * an unbiased estimate of p'(y) as long as q covers the new posterior (importance sampling is
 * exact for any target that q covers: Robert & Casella 2004, Monte Carlo Statistical Methods,
 * section 3.3). Whether it does is what the Pareto k of the new weights says; draws that lay
 * outside the old prior's support carry no likelihood estimate, so a new prior that gives them
 * mass cannot be judged from these draws (counted as uncovered). */

/* NULL when out of memory. tf_evidence_draws_free accepts NULL. */
tf_evidence_draws *tf_evidence_draws_new(void);
void tf_evidence_draws_free(tf_evidence_draws *k);
size_t tf_evidence_draws_n(const tf_evidence_draws *k);
size_t tf_evidence_draws_dim(const tf_evidence_draws *k);
/* Draw i: theta (dim values, natural scale), the log likelihood estimate (-INFINITY for an
 * estimate of 0; NaN when none was made because the old prior is 0 there), log q(z) and the log
 * prior of z with the Jacobian. */
const double *tf_evidence_draws_theta(const tf_evidence_draws *k, size_t i);
double tf_evidence_draws_log_lik(const tf_evidence_draws *k, size_t i);
double tf_evidence_draws_log_q(const tf_evidence_draws *k, size_t i);
double tf_evidence_draws_log_prior(const tf_evidence_draws *k, size_t i);

/* log p'(theta) - log p(theta) for the new prior p' and the old p, on the natural scale (the
 * Jacobian of z is the same for both and cancels): -INFINITY where p' is 0, +INFINITY where p is
 * 0 and p' is not. */
typedef double (*tf_evidence_log_ratio_fn)(void *ctx, const double *theta);

/* The estimate of the draws kept in k under the prior that log_ratio describes, into *out
 * (log_ml, se, pareto_k, ess as for the original; n_zero counts weights of 0), and in
 * *n_uncovered (may be NULL) the draws that the new prior gives mass but that carry no
 * likelihood estimate: with any, the estimate misses part of p'(y) and must not be trusted.
 * Errors: TF_ERR_INVALID when k holds no draws; TF_ERR_NUMERIC when every new weight is 0;
 * TF_ERR_NOMEM. */
tf_status tf_evidence_reweight(const tf_evidence_draws *k, tf_evidence_log_ratio_fn log_ratio, void *ctx,
                               tf_evidence_estimate *out, size_t *n_uncovered, tf_error *err);

#endif
