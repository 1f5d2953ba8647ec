/* Fitting one model to one population by particle marginal Metropolis-Hastings (Andrieu, Doucet
 * & Holenstein 2010): a pilot to find the posterior, particle-count tuning there, then several
 * chains in parallel threads whose kept draws and latent paths make a tf_fit. */
#ifndef TF_PMMH_H
#define TF_PMMH_H

#include <signal.h>
#include <stddef.h>
#include <stdint.h>

#include "filter/filter.h"
#include "sampler/fit.h"
#include "sampler/posterior.h"
#include "survey/series.h"
#include "util/error.h"

typedef struct {
    size_t n_chains;         /* >= 1; 4 by default (R-hat needs >= 2) */
    /* Run length by need. After the warm-up the chains run in blocks; at the end of a block (the
     * same for every chain) the run stops once it has run at least min_iter iterations per chain
     * and every parameter and the log-abundance of the first and last year have split R-hat <=
     * TF_FIT_RHAT_MAX and bulk and tail ESS >= min_ess (tf_fit_meets), or once it has run
     * max_iter. min_iter == max_iter gives a run of fixed length. */
    size_t min_iter, max_iter;
    double min_ess;          /* > 0 */
    size_t thin;             /* iterations per kept draw at the start, >= 1 */
    /* Kept draws per chain at most, >= 8: when they are all used, every second one is dropped
     * (tf_fit_halve) and the thinning doubles, so memory stays bounded however long the run. */
    size_t max_kept;
    size_t n_warmup;         /* adapted, discarded draws per chain (half pilot, half exact) */
    size_t n_threads;        /* >= 1; results do not depend on it */
    uint64_t seed;
    size_t n_particles;      /* 0 = choose by tf_tune_particles */
    int correlated;          /* correlated pseudo-marginal method (Deligiannidis et al. 2018) */
    double rho;              /* its correlation, in [0, 1) */
    size_t pilot_particles;  /* particles of the pilot phase */
    /* Delayed acceptance in the exact chains: each proposal is screened by the extended Kalman
     * filter of screen.h before the particle filter runs (chain.h, log_screen). Exact either
     * way; it only changes the cost per iteration and the mixing. 1 on, 0 off (the default:
     * pmmh.c says why). */
    int delayed;
    tf_proposal proposal;    /* how the particle filter moves (filter.h); guided by default */
    /* Years of the recent trend the fit summarises (tf_fit_set_recent_years; 0 = its default). */
    size_t recent_years;
} tf_pmmh_options;

/* Blocks: an eighth of max_kept kept draws each, so that the run looks at its diagnostics eight
 * times before the kept draws are full and four times after each halving: it overshoots the
 * length it needed by at most a quarter (pmmh.c says why). */
#define TF_PMMH_BLOCKS_PER_STORE 8

/* The defaults (see pmmh.c for the reasons behind each value). */
tf_pmmh_options tf_pmmh_default_options(void);

/* Phases in the order they run: the pilot (first half of the warm-up), particle tuning, and the
 * exact chains (second half of the warm-up, then the kept draws). */
typedef enum { TF_PMMH_PILOT, TF_PMMH_TUNE, TF_PMMH_MAIN } tf_pmmh_phase;

/* What a progress callback sees: a snapshot, valid during the call only. */
typedef struct {
    tf_pmmh_phase phase;
    size_t n_chains;
    const size_t *done;        /* iterations finished per chain, of total */
    size_t total;              /* iterations per chain, all phases, so far planned: n_warmup
                                * and the blocks up to the next look at the diagnostics */
    const double *acceptance;  /* per chain, over the current phase so far */
    size_t n_particles;        /* 0 until chosen */
    double seconds;            /* since the start */
} tf_pmmh_progress;

/* Called from the calling thread about ten times a second while the chains run. */
typedef void (*tf_pmmh_progress_fn)(void *ctx, const tf_pmmh_progress *p);

/* Fits the posterior post (model and priors) to series s. Chain c draws from the stream
 * tf_rng_derive(seed, {key(population label), key(model name), c}); the pilot centre and the
 * tuning from their own streams, so the result is the same for any n_threads.
 * stop: polled by every chain each iteration; when it becomes non-zero the run stops within a
 * fraction of a second and returns TF_ERR_INTERRUPTED with nothing in *out. May be NULL.
 * progress may be NULL. On success *out is a summarised fit (free with tf_fit_free) that
 * borrows the model and s. Errors: TF_ERR_INVALID for bad options, TF_ERR_NOMEM,
 * TF_ERR_NUMERIC when no chain start with a finite likelihood estimate is found,
 * TF_ERR_INTERRUPTED. */
tf_status tf_pmmh_run(const tf_posterior *post, const tf_series *s, const tf_pmmh_options *opt,
                      const volatile sig_atomic_t *stop, tf_pmmh_progress_fn progress,
                      void *progress_ctx, tf_fit **out, tf_error *err);

#endif
