/* Choosing the particle count: measure the spread of the filter's log-likelihood estimate at a
 * few parameter points from a pilot run and pick the number of particles that brings it to a
 * target (Doucet, Pitt, Deligiannidis & Kohn 2015; Pitt, Silva, Giordani & Kohn 2012). */
#ifndef TF_TUNE_H
#define TF_TUNE_H

#include <signal.h>
#include <stddef.h>

#include "filter/filter.h"
#include "model/model.h"
#include "survey/series.h"
#include "util/error.h"
#include "util/rng.h"

/* The fewest repetitions a spread is measured from. */
#define TF_TUNE_MIN_REPS 8

typedef struct {
    /* 0: the spread is the SD of log p^(y | theta) over independent runs (standard
     * pseudo-marginal). 1: the spread is the SD of the difference of two estimates whose random
     * numbers are correlated by rho as one step of the correlated method moves them
     * (Deligiannidis, Doucet & Pitt 2018): that difference is what enters the acceptance ratio. */
    int correlated;
    double rho;
    tf_proposal proposal;  /* the filter's proposal (guided when zero-initialised) */
    double target_sd;      /* the spread wanted */
    size_t n_reps;         /* repetitions per point and measurement, >= TF_TUNE_MIN_REPS */
    size_t start_particles;
    size_t min_particles, max_particles;
    size_t max_rounds;     /* measurements at most, each at one particle count */
    /* Polled between repetitions; non-zero stops the tuning with TF_ERR_INTERRUPTED. May be NULL. */
    const volatile sig_atomic_t *stop;
} tf_tune_options;

/* Standard: target 1.0; correlated: rho 0.99 and target 1.0 for the SD of the log-ratio (the
 * reasons are in tune.c). Guided proposal, 60 repetitions per point, 100 particles to start, at
 * least 12 (counts are rounded up to a multiple of 4), at most 200000, 5 rounds. */
tf_tune_options tf_tune_default_options(int correlated);

typedef struct {
    size_t n_particles;    /* the count chosen */
    double sd;             /* the spread measured at that count: the root mean square over the
                            * points (INFINITY when an estimate was not finite at max_particles) */
    double sd_first;       /* the spread at the first point alone */
    double mean_loglik;    /* the mean estimate at that count */
    size_t n_rounds;       /* measurements made */
    int reached;           /* 1 when sd <= 1.25 target_sd at the chosen count */
} tf_tune_result;

/* Measures the spread (per opt->correlated, see above) of the estimate at theta with the filter
 * f over n_reps repetitions drawing from rng. z_move / z_pick: caller's buffers of
 * tf_filter_n_move(f) / tf_filter_n_pick(f) doubles, each needed twice in the correlated case
 * (so 2 n_move and 2 n_pick values); unused (may be NULL) in the standard case.
 * Writes *sd (INFINITY when any estimate was not finite) and *mean; both NAN when opt->stop
 * was set during the measurement. */
void tf_tune_measure(tf_filter *f, const double *theta, const tf_tune_options *opt, tf_rng *rng,
                     double *z_move, double *z_pick, double *sd, double *mean);

/* Chooses the particle count for model m and series s from the spread at n_points parameter
 * points (points: n_points rows of n_params values, natural scale; e.g. a pilot estimate of the
 * posterior centre and a few pilot draws). The spread is the root mean square of the SDs at the
 * points: the estimator's variance is far from constant over a posterior (it grows where the
 * process noise is small), and the chain's acceptance rate depends on the variance where the
 * chain is, so a spread measured at the centre alone understates it. The spread falls like
 * 1/sqrt(N) (Pitt et al. 2012, section 3; Berard, Del Moral & Doucet 2014), so each round
 * extrapolates N' = N (sd / target)^2 from the last measurement and measures again at N', until
 * the measured spread is within 15 % of the target or max_rounds is used. It never measures at
 * or above the smallest count that already reached the target: when the extrapolation asks for
 * that, it bisects (on the log scale) between the last count and that one. A count whose
 * estimates were not all finite is quadrupled. Writes *out. Errors: TF_ERR_NOMEM; TF_ERR_INVALID for bad options;
 * TF_ERR_INTERRUPTED when opt->stop was set.
 * Not reaching the target is not an error: out->reached says so. */
tf_status tf_tune_particles(const tf_model *m, const tf_series *s, const double *points,
                            size_t n_points, const tf_tune_options *opt, tf_rng *rng,
                            tf_tune_result *out, tf_error *err);

#endif
