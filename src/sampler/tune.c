/* Particle-count tuning by measured spread of the log-likelihood estimate; see tune.h. */
#include "sampler/tune.h"

#include <math.h>
#include <stdlib.h>

tf_tune_options tf_tune_default_options(int correlated)
{
    tf_tune_options o = {
        .correlated = correlated != 0,
        .rho = 0.99,
        /* Standard: Doucet et al. (2015, Biometrika 102:295, section 4) find the best SD of the
         * log-likelihood estimator between about 1.0 and 1.7 and recommend about 1.2 (values
         * recalled from the paper). Correlated: the acceptance ratio sees the difference of two
         * correlated estimates; 1.0 for its SD is the benchmark's choice (bench/bench_fit.c)
         * — with independent estimates at SD 1.2 the difference has SD 1.2 sqrt(2) = 1.7. */
        .target_sd = correlated ? 1.0 : 1.0,
        .n_reps = 60,
        .start_particles = 100,
        /* A floor that only stops the extrapolation from asking for a handful of particles on
         * one lucky measurement. The guided filter often reaches the target with 10-30
         * particles (its spread at 100 is 0.1-0.5 on the demo surveys), and the spread is
         * measured at points through the posterior (tf_tune_particles), not at its centre
         * alone, so no higher floor is needed to cover the tails; the correlated method's point
         * is to need fewer too. (Before the guided filter the standard method's floor was 100.) */
        .min_particles = 12,
        .max_particles = 200000,
        .max_rounds = 5,
        .stop = NULL,
    };
    return o;
}

void tf_tune_measure(tf_filter *f, const double *theta, const tf_tune_options *opt, tf_rng *rng,
                     double *z_move, double *z_pick, double *sd, double *mean)
{
    size_t n_move = tf_filter_n_move(f), n_pick = tf_filter_n_pick(f);
    double rho = opt->rho, root = sqrt(1.0 - rho * rho);
    /* Welford's one-pass mean and variance (numerically safe for log-likelihoods of -1e4). */
    double m = 0.0, m2 = 0.0, level = 0.0;
    int finite = 1;
    for (size_t r = 0; r < opt->n_reps; r++) {
        if (opt->stop && *opt->stop) {
            *sd = *mean = NAN;
            return;
        }
        double v;
        if (opt->correlated) {
            double *mv0 = z_move, *mv1 = z_move + n_move, *pk0 = z_pick, *pk1 = z_pick + n_pick;
            tf_rng_fill_normal(rng, mv0, n_move);
            tf_rng_fill_normal(rng, pk0, n_pick);
            /* The move of the auxiliary normals one chain step makes (chain.c). */
            for (size_t i = 0; i < n_move; i++)
                mv1[i] = rho * mv0[i] + root * tf_rng_normal(rng);
            for (size_t i = 0; i < n_pick; i++)
                pk1[i] = rho * pk0[i] + root * tf_rng_normal(rng);
            double a = tf_filter_loglik_fixed(f, theta, mv0, pk0, NULL);
            double b = tf_filter_loglik_fixed(f, theta, mv1, pk1, NULL);
            v = b - a;
            level += a;
        } else {
            v = tf_filter_loglik(f, theta, rng, NULL);
            level += v;
        }
        if (!isfinite(v)) {
            finite = 0;
            break;
        }
        double d = v - m;
        m += d / (double)(r + 1);
        m2 += d * (v - m);
    }
    if (!finite) {
        *sd = INFINITY;
        *mean = -INFINITY;
        return;
    }
    *sd = sqrt(m2 / (double)(opt->n_reps - 1));
    *mean = level / (double)opt->n_reps;
}

/* One measurement at n particles over the points, with buffers sized for it: the root mean
 * square of the SDs, and the SD at the first point. */
static tf_status measure_at(const tf_model *m, const tf_series *s, const double *points, size_t n_points,
                            size_t n, const tf_tune_options *opt, tf_rng *rng, double *sd, double *sd_first,
                            double *mean, tf_error *err)
{
    tf_filter *f = tf_filter_alloc(m, s, n);
    double *z_move = NULL, *z_pick = NULL;
    if (!f)
        goto nomem;
    tf_filter_set_proposal(f, opt->proposal);
    if (opt->correlated) {
        z_move = malloc(2 * tf_filter_n_move(f) * sizeof(double));
        z_pick = malloc(2 * tf_filter_n_pick(f) * sizeof(double));
        if (!z_move || !z_pick)
            goto nomem;
    }
    size_t np = tf_model_n_params(m);
    double var = 0.0;
    for (size_t k = 0; k < n_points; k++) {
        double sd_k, mean_k;
        tf_tune_measure(f, points + k * np, opt, rng, z_move, z_pick, &sd_k, &mean_k);
        if (k == 0) {
            *sd_first = sd_k;
            *mean = mean_k;
        }
        var += sd_k * sd_k / (double)n_points;
        if (isnan(sd_k) || isinf(sd_k)) {
            var = sd_k * sd_k;
            break;
        }
    }
    *sd = sqrt(var);
    free(z_move);
    free(z_pick);
    tf_filter_free(f);
    return TF_OK;
nomem:
    free(z_move);
    free(z_pick);
    tf_filter_free(f);
    return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL,
                        "out of memory for a particle filter with %zu particles", n);
}

/* Counts are rounded up to a multiple of PARTICLE_STEP: the filter's loops run in vectors of 4
 * doubles (AVX2), and at the small counts the guided filter settles at (10-30) a remainder of 2
 * left scalar exp, log1p and the like on a fifth of the particles, which cost as much as the
 * other eight; 12 particles then cost about what 10 did. */
#define PARTICLE_STEP 4

static size_t clamp(double n, const tf_tune_options *opt)
{
    if (!(n < (double)opt->max_particles))
        return opt->max_particles;
    if (n < (double)opt->min_particles)
        n = (double)opt->min_particles;
    size_t k = (size_t)ceil(n);
    if (opt->min_particles != opt->max_particles)
        k = (k + PARTICLE_STEP - 1) / PARTICLE_STEP * PARTICLE_STEP;
    return k < opt->max_particles ? k : opt->max_particles;
}

tf_status tf_tune_particles(const tf_model *m, const tf_series *s, const double *points,
                            size_t n_points, const tf_tune_options *opt, tf_rng *rng,
                            tf_tune_result *out, tf_error *err)
{
    if (n_points == 0 || opt->n_reps < TF_TUNE_MIN_REPS || !(opt->target_sd > 0) ||
        opt->min_particles == 0 || opt->min_particles > opt->max_particles || opt->max_rounds == 0 ||
        (opt->correlated && !(opt->rho >= 0 && opt->rho < 1)))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "unusable particle-tuning options");
    /* Accept a spread within this factor of the target: the root mean square over 8 points of
     * 30 repetitions has a relative standard error of about 1/sqrt(2 * 8 * 29) = 5 % if the
     * estimates were Gaussian, more with their heavier tails; closer agreement would chase
     * noise. */
    const double tolerance = 1.15;

    size_t n = clamp((double)opt->start_particles, opt);
    tf_tune_result r = {.n_particles = n, .sd = INFINITY, .sd_first = INFINITY,
                        .mean_loglik = -INFINITY};
    tf_tune_result best = r;   /* the smallest count that reached the target */
    for (size_t round = 0; round < opt->max_rounds; round++) {
        double sd = NAN, sd_first = NAN, mean = NAN;
        tf_status st = measure_at(m, s, points, n_points, n, opt, rng, &sd, &sd_first, &mean, err);
        if (st != TF_OK)
            return st;
        if (isnan(sd))
            return tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
        r.n_rounds = round + 1;
        r.n_particles = n;
        r.sd = sd;
        r.sd_first = sd_first;
        r.mean_loglik = mean;
        r.reached = sd <= tolerance * opt->target_sd;
        if (r.reached && (!best.reached || n < best.n_particles))
            best = r;
        /* Stop on the target, and also when fewer would do but the next count would be close
         * to this one (a smaller count saves time, but only if it is clearly smaller). */
        size_t next = isfinite(sd) ? clamp((double)n * (sd / opt->target_sd) * (sd / opt->target_sd), opt)
                                   : clamp(4.0 * (double)n, opt);
        if (r.reached && (double)next > 0.7 * (double)n)
            break;
        if (next == n)
            break;
        /* Only a smaller count can replace the smallest one that reached the target, so a count
         * at or above it is not worth measuring. The extrapolation asks for one when a count
         * far too small spreads much more than 1/sqrt(N) predicts (seen with the correlated
         * method at 10 particles: it asked for 200000 after 100 had reached the target, which
         * cost minutes for nothing). The answer then lies between this count and that one:
         * bisect on the log scale, unless the saving would be small (as above). */
        if (best.reached && next >= best.n_particles) {
            next = clamp(sqrt((double)n * (double)best.n_particles), opt);
            if (next <= n || (double)next > 0.7 * (double)best.n_particles)
                break;
        }
        n = next;
    }
    best.n_rounds = r.n_rounds;
    *out = best.reached ? best : r;
    return TF_OK;
}
