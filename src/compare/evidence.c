/* Marginal likelihood by importance sampling squared (Tran, Scharth, Pitt & Kohn 2014). */
#include "compare/evidence.h"

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "compare/pareto.h"
#include "compare/tmix.h"
#include "filter/filter.h"
#include "sampler/tune.h"

/* Draws per random stream. Blocks are the unit of work handed to threads, so a fixed size is
 * what keeps results independent of the thread count. */
#define BLOCK 32
/* Stage numbers in the stream keys: adaptation round r uses STAGE_ADAPT + r. */
#define STAGE_ADAPT 0
#define STAGE_MAIN 1000
#define STAGE_CHECK 1001
#define STAGE_TUNE 1002
#define MAX_KEYS 6
/* Parameter points the particle count is tuned at: the centre and four spread draws. */
#define TUNE_POINTS 5
#define MAX_THREADS 256

tf_evidence_options tf_evidence_default_options(void)
{
    tf_evidence_options o;
    /* 2000 draws give a delta-method se near 0.02 - 0.05 on the log scale for the weights seen
     * on the demo surveys (relative weight sd 1 - 2), far below the differences between models
     * that matter on the Kass & Raftery scale (2 ln B of 2 is ln B = 1). */
    o.n_draws = 2000;
    o.n_adapt_rounds = 3;
    o.n_adapt_draws = 400;
    /* nu = 5: tails heavy enough to cover a posterior heavier than normal (the t's weights are
     * bounded whenever the target's tails are no heavier than t_5), with finite variance so
     * that the fitted scale means something (Tran et al. 2014 use a t mixture for the same
     * reason; the exact choice is common practice, no source). */
    o.nu = 5.0;
    o.defensive_weight = 0.1;
    o.defensive_scale = 4.0;   /* twice the sd in every direction */
    o.check_nu = 3.0;
    o.check_scale = 2.0;
    o.n_particles = 0;
    /* Tran et al. (2014, section 3.3) find the cost of IS^2 minimised near an sd of 1 of the
     * log-likelihood estimator (recalled from memory). */
    o.target_sd = 1.0;
    o.n_threads = 1;
    o.seed = 1;
    return o;
}

static tf_status check_options(const tf_evidence_options *o, size_t n_keys, tf_error *err)
{
    if (o->n_draws < 100 || (o->n_adapt_rounds > 0 && o->n_adapt_draws < 50) || o->n_adapt_rounds > 100)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "importance sampling needs at least 100 draws and 50 per adaptation round");
    if (!(o->nu > 0 && o->nu < INFINITY) || !(o->check_nu > 0 && o->check_nu < INFINITY) ||
        !(o->defensive_weight >= 0 && o->defensive_weight < 1) || !(o->defensive_scale >= 1 && o->defensive_scale < 1e6) ||
        !(o->check_scale > 0 && o->check_scale < 1e6))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "unusable importance density settings");
    if (o->n_threads < 1 || o->n_threads > MAX_THREADS || n_keys > MAX_KEYS)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "unusable thread count or stream keys");
    return TF_OK;
}

/* ---- one stage: n draws from q, their log weights ---- */

typedef struct {
    const tf_evidence_target *t;
    const tf_tmix *q;
    size_t n;
    double *z;        /* n x dim */
    double *lw;       /* n */
    uint64_t seed;
    uint64_t keys[MAX_KEYS + 2];
    size_t n_keys;    /* including the stage; the block index is appended */
    const volatile sig_atomic_t *stop;
    pthread_mutex_t lock;
    size_t next_block;
    int interrupted;
} stage_job;

typedef struct {
    stage_job *job;
    void *worker;
} thread_arg;

static void run_block(stage_job *j, void *worker, size_t b)
{
    const size_t d = j->t->dim;
    uint64_t keys[MAX_KEYS + 3];
    memcpy(keys, j->keys, j->n_keys * sizeof *keys);
    keys[j->n_keys] = (uint64_t)b;
    tf_rng rng;
    tf_rng_derive(&rng, j->seed, keys, j->n_keys + 1);
    size_t end = (b + 1) * BLOCK < j->n ? (b + 1) * BLOCK : j->n;
    double theta[TF_TMIX_MAX_DIM];
    for (size_t k = b * BLOCK; k < end; k++) {
        double *z = j->z + k * d;
        tf_tmix_draw(j->q, &rng, z);
        double lq = tf_tmix_log_density(j->q, z);
        double lp = j->t->log_prior(j->t->ctx, z, theta);
        double lw = -INFINITY;
        if (lp > -INFINITY && lq > -INFINITY) {
            double ll = j->t->log_lik(worker, theta, &rng);
            if (ll > -INFINITY && ll < INFINITY)
                lw = lp + ll - lq;
        }
        j->lw[k] = isnan(lw) ? -INFINITY : lw;
    }
}

static void *stage_thread(void *arg)
{
    thread_arg *a = arg;
    stage_job *j = a->job;
    const size_t n_blocks = (j->n + BLOCK - 1) / BLOCK;
    for (;;) {
        pthread_mutex_lock(&j->lock);
        size_t b = j->next_block++;
        int stop = j->stop && *j->stop;
        if (stop)
            j->interrupted = 1;
        pthread_mutex_unlock(&j->lock);
        if (b >= n_blocks || stop)
            break;
        run_block(j, a->worker, b);
    }
    return NULL;
}

/* Runs one stage on the workers (one thread each; the calling thread is the first). */
static tf_status run_stage(stage_job *j, void **workers, size_t n_threads, tf_error *err)
{
    pthread_t tid[MAX_THREADS];
    thread_arg args[MAX_THREADS];
    size_t n_started = 0;
    j->next_block = 0;
    j->interrupted = 0;
    if (pthread_mutex_init(&j->lock, NULL) != 0)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "cannot create a lock");
    for (size_t i = 0; i < n_threads; i++) {
        args[i].job = j;
        args[i].worker = workers[i];
    }
    /* A thread that cannot be started leaves its share to the others. */
    for (size_t i = 1; i < n_threads; i++) {
        if (pthread_create(&tid[n_started], NULL, stage_thread, &args[i]) != 0)
            break;
        n_started++;
    }
    stage_thread(&args[0]);
    for (size_t i = 0; i < n_started; i++)
        pthread_join(tid[i], NULL);
    pthread_mutex_destroy(&j->lock);
    if (j->interrupted)
        return tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
    return TF_OK;
}

/* ---- summaries of the weights ---- */

/* log of the mean of exp(lw), the delta-method se of it, the Kish ESS and the Pareto k. */
static tf_status summarise(const double *lw, size_t n, tf_evidence_estimate *e, tf_error *err)
{
    double top = -INFINITY;
    size_t n_zero = 0;
    for (size_t k = 0; k < n; k++) {
        if (lw[k] > top)
            top = lw[k];
        n_zero += !(lw[k] > -INFINITY);
    }
    e->n_draws = n;
    e->n_zero = n_zero;
    if (!(top > -INFINITY) || !(top < INFINITY))
        return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0,
                            "the fit may not have converged, or the counts rule out every parameter value drawn",
                            "every importance weight is zero");
    /* Weights relative to the largest, so none overflows; two passes for the variance. */
    double s = 0, s2 = 0;
    for (size_t k = 0; k < n; k++) {
        double w = exp(lw[k] - top);
        s += w;
        s2 += w * w;
    }
    double mean = s / (double)n, ss = 0;
    for (size_t k = 0; k < n; k++) {
        double dv = exp(lw[k] - top) - mean;
        ss += dv * dv;
    }
    e->log_ml = top + log(mean);
    /* Delta method: Var(log mean w) ~ Var(w) / (M mean(w)^2). */
    e->se = sqrt(ss / (double)(n - 1) / (double)n) / mean;
    e->ess = s * s / s2;
    size_t n_tail;
    return tf_pareto_k(lw, n, &e->pareto_k, &n_tail, err);
}

/* ---- the importance densities ---- */

static tf_status make_density(tf_tmix *q, size_t d, double nu, double dw, const double *mean, const double *cov,
                              double scale, const double *def_mean, const double *def_cov, double def_scale,
                              tf_error *err)
{
    tf_status st = tf_tmix_init(q, d, err);
    if (st == TF_OK)
        st = tf_tmix_add(q, 1.0 - dw, nu, mean, cov, scale, err);
    if (st == TF_OK && dw > 0)
        st = tf_tmix_add(q, dw, nu, def_mean, def_cov, def_scale, err);
    return st;
}

/* Refits centre and scale to a round's weighted draws. The weights are truncated at
 * mean(w) sqrt(n) (truncated importance sampling, Ionides 2008, J. Comput. Graph. Stat. 17:295)
 * so that one lucky likelihood estimate cannot pull the fit onto a single point. Returns 1 when
 * the refit took place (enough effective draws and a positive-definite covariance). */
static int refit(const double *z, const double *lw, size_t n, size_t d, double *w, double *mean, double *cov)
{
    double top = -INFINITY;
    for (size_t k = 0; k < n; k++)
        if (lw[k] > top)
            top = lw[k];
    if (!(top > -INFINITY) || !(top < INFINITY))
        return 0;
    double s = 0;
    for (size_t k = 0; k < n; k++) {
        w[k] = exp(lw[k] - top);
        s += w[k];
    }
    double cap = s / (double)n * sqrt((double)n);
    for (size_t k = 0; k < n; k++)
        if (w[k] > cap)
            w[k] = cap;
    double m[TF_TMIX_MAX_DIM], c[TF_TMIX_MAX_DIM * TF_TMIX_MAX_DIM];
    double ess = tf_tmix_weighted_moments(z, w, n, d, m, c);
    /* Fewer effective draws than 2 (d + 1) cannot fix a d x d covariance with any accuracy. */
    if (ess < 2.0 * ((double)d + 1.0))
        return 0;
    tf_tmix probe;
    if (tf_tmix_init(&probe, d, NULL) != TF_OK || tf_tmix_add(&probe, 1.0, 1.0, m, c, 1.0, NULL) != TF_OK)
        return 0;
    memcpy(mean, m, d * sizeof *m);
    memcpy(cov, c, d * d * sizeof *c);
    return 1;
}

tf_status tf_evidence_run(const tf_evidence_target *t, const double *z_draws, size_t n_z,
                          const tf_evidence_options *opt, const uint64_t *keys, size_t n_keys,
                          const volatile sig_atomic_t *stop, tf_evidence *out, tf_error *err)
{
    tf_status st = check_options(opt, n_keys, err);
    if (st != TF_OK)
        return st;
    const size_t d = t->dim;
    if (d < 1 || d > TF_TMIX_MAX_DIM || !t->log_prior || !t->log_lik || !t->worker_new || !t->worker_free)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "unusable evidence target");
    if (n_z < 2 * d + 2)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, "run the fit for more iterations",
                            "%zu posterior draws are too few to fit an importance density in %zu dimensions", n_z, d);

    memset(out, 0, sizeof *out);
    out->loglik_sd = NAN;
    size_t n_max = opt->n_draws > opt->n_adapt_draws ? opt->n_draws : opt->n_adapt_draws;
    void *workers[MAX_THREADS] = {NULL};
    double *z = malloc(n_max * d * sizeof *z), *lw = malloc(n_max * sizeof *lw), *w = malloc(n_max * sizeof *w);
    double *col = malloc(n_z * sizeof *col);
    size_t n_threads = opt->n_threads;
    if (!z || !lw || !w || !col) {
        st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for %zu importance draws", n_max);
        goto done;
    }
    for (size_t i = 0; i < n_threads; i++)
        if (!(workers[i] = t->worker_new(t->ctx))) {
            st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for the likelihood workspaces");
            goto done;
        }

    /* Moments and coordinate-wise median of the posterior draws. */
    double mean0[TF_TMIX_MAX_DIM], cov0[TF_TMIX_MAX_DIM * TF_TMIX_MAX_DIM], median0[TF_TMIX_MAX_DIM];
    {
        for (size_t i = 0; i < d; i++) {
            double s = 0;
            for (size_t k = 0; k < n_z; k++)
                s += z_draws[k * d + i];
            mean0[i] = s / (double)n_z;
        }
        for (size_t i = 0; i < d; i++)
            for (size_t j = 0; j <= i; j++) {
                double s = 0;
                for (size_t k = 0; k < n_z; k++)
                    s += (z_draws[k * d + i] - mean0[i]) * (z_draws[k * d + j] - mean0[j]);
                cov0[i * d + j] = cov0[j * d + i] = s / (double)(n_z - 1);
            }
        for (size_t i = 0; i < d; i++) {
            for (size_t k = 0; k < n_z; k++)
                col[k] = z_draws[k * d + i];
            gsl_sort(col, 1, n_z);
            median0[i] = gsl_stats_median_from_sorted_data(col, 1, n_z);
        }
    }

    stage_job job;
    memset(&job, 0, sizeof job);
    job.t = t;
    job.z = z;
    job.lw = lw;
    job.seed = opt->seed;
    job.stop = stop;
    memcpy(job.keys, keys, n_keys * sizeof *keys);
    job.n_keys = n_keys + 1;

    tf_tmix q;
    double mean[TF_TMIX_MAX_DIM], cov[TF_TMIX_MAX_DIM * TF_TMIX_MAX_DIM];
    memcpy(mean, mean0, sizeof mean);
    memcpy(cov, cov0, sizeof cov);
    if ((st = make_density(&q, d, opt->nu, opt->defensive_weight, mean, cov, 1.0, mean0, cov0, opt->defensive_scale,
                           err)) != TF_OK)
        goto done;
    job.q = &q;
    for (size_t r = 0; r < opt->n_adapt_rounds; r++) {
        job.n = opt->n_adapt_draws;
        job.keys[n_keys] = STAGE_ADAPT + r;
        if ((st = run_stage(&job, workers, n_threads, err)) != TF_OK)
            goto done;
        if (refit(z, lw, job.n, d, w, mean, cov)) {
            tf_tmix next;
            /* The defensive part stays on the PMMH draws' moments, so no adaptation can take
             * the density's support away from the posterior the chains found. */
            if (make_density(&next, d, opt->nu, opt->defensive_weight, mean, cov, 1.0, mean0, cov0,
                             opt->defensive_scale, NULL) == TF_OK) {
                q = next;
                out->n_adapt_used++;
            }
        }
    }
    job.n = opt->n_draws;
    job.keys[n_keys] = STAGE_MAIN;
    if ((st = run_stage(&job, workers, n_threads, err)) != TF_OK || (st = summarise(lw, job.n, &out->main, err)) != TF_OK)
        goto done;

    tf_tmix qc;
    if ((st = make_density(&qc, d, opt->check_nu, opt->defensive_weight, median0, cov0, opt->check_scale, median0,
                           cov0, opt->check_scale * opt->defensive_scale, err)) != TF_OK)
        goto done;
    job.q = &qc;
    job.keys[n_keys] = STAGE_CHECK;
    if ((st = run_stage(&job, workers, n_threads, err)) != TF_OK || (st = summarise(lw, job.n, &out->check, err)) != TF_OK)
        goto done;

    out->z_diff = (out->main.log_ml - out->check.log_ml) /
                  sqrt(out->main.se * out->main.se + out->check.se * out->check.se);
    out->agree = fabs(out->z_diff) <= TF_EVIDENCE_Z_MAX;
    out->reliable = out->main.pareto_k <= TF_PARETO_K_MAX && out->check.pareto_k <= TF_PARETO_K_MAX;
done:
    for (size_t i = 0; i < n_threads; i++)
        if (workers[i])
            t->worker_free(workers[i]);
    free(z);
    free(lw);
    free(w);
    free(col);
    return st;
}

/* ---- the particle-filter target ---- */

typedef struct {
    const tf_posterior *post;
    const tf_series *s;
    size_t n_particles;
} pf_ctx;

static double pf_log_prior(void *ctx, const double *z, double *theta)
{
    const pf_ctx *c = ctx;
    return tf_posterior_log_prior_z(c->post, z, theta);
}

static void *pf_worker_new(void *ctx)
{
    const pf_ctx *c = ctx;
    return tf_filter_alloc(tf_posterior_model(c->post), c->s, c->n_particles);
}

static void pf_worker_free(void *worker) { tf_filter_free(worker); }

static double pf_log_lik(void *worker, const double *theta, tf_rng *rng)
{
    return tf_filter_loglik(worker, theta, rng, NULL);
}

tf_status tf_evidence_estimate_fit(const tf_posterior *post, const tf_series *s, const tf_fit *fit,
                                   const tf_evidence_options *opt, const volatile sig_atomic_t *stop,
                                   tf_evidence *out, tf_error *err)
{
    const tf_model *m = tf_posterior_model(post);
    if (tf_fit_model(fit) != m || tf_fit_series(fit) != s)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "the fit is not of this model and series");
    const size_t d = tf_posterior_dim(post), n_fit = tf_fit_n_draws(fit);
    if (d > TF_TMIX_MAX_DIM)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "too many parameters (%zu)", d);
    double *zd = malloc(n_fit * d * sizeof *zd);
    if (!zd)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for %zu draws", n_fit);
    /* Draws that fall on the edge of the support in floating point have no z; they are left
     * out (they carry no weight in any density of z). */
    size_t n_z = 0;
    for (size_t c = 0; c < tf_fit_n_chains(fit); c++)
        for (size_t i = 0; i < tf_fit_n_iter(fit); i++)
            if (tf_posterior_to_z(post, tf_fit_draw(fit, c, i), zd + n_z * d)) {
                int finite = 1;
                for (size_t j = 0; j < d; j++)
                    finite &= isfinite(zd[n_z * d + j]);
                n_z += (size_t)finite;
            }

    const char *label = tf_series_label(s), *name = tf_model_name(m);
    uint64_t keys[3] = {tf_rng_key("evidence"), tf_rng_key(label), tf_rng_key(name)};
    pf_ctx ctx = {post, s, opt->n_particles};
    double sd = NAN;
    tf_status st = TF_OK;
    if (ctx.n_particles == 0 && n_z > 0) {
        /* The particle count that brings the log-estimate's sd to about target_sd at the
         * centre of the draws, starting from the fit's count (its target, 1.2 for the standard
         * method, is already close; for the correlated method the fit's count is tuned to a
         * log-ratio and usually far too small for independent estimates). */
        /* Measured at the centre of the draws and at a few draws spread through the fit: the
         * estimator's spread varies over the posterior (tune.h), and the importance draws
         * cover all of it. */
        double zc[TF_TMIX_MAX_DIM], points[TUNE_POINTS * TF_MAX_PARAMS];
        for (size_t j = 0; j < d; j++) {
            double acc = 0;
            for (size_t k = 0; k < n_z; k++)
                acc += zd[k * d + j];
            zc[j] = acc / (double)n_z;
        }
        tf_posterior_log_prior_z(post, zc, points);
        for (size_t p = 1; p < TUNE_POINTS; p++)
            tf_posterior_log_prior_z(post, zd + (p * (n_z - 1) / (TUNE_POINTS - 1)) * d, points + p * d);
        tf_tune_options topt = tf_tune_default_options(0);
        topt.target_sd = opt->target_sd;
        size_t n0 = tf_fit_settings_of(fit)->n_particles;
        if (n0 >= topt.min_particles && n0 <= topt.max_particles)
            topt.start_particles = n0;
        topt.stop = stop;
        uint64_t tkeys[4] = {keys[0], keys[1], keys[2], STAGE_TUNE};
        tf_rng rng;
        tf_rng_derive(&rng, opt->seed, tkeys, 4);
        tf_tune_result tr;
        if ((st = tf_tune_particles(m, s, points, TUNE_POINTS, &topt, &rng, &tr, err)) != TF_OK) {
            free(zd);
            return st;
        }
        ctx.n_particles = tr.n_particles;
        sd = tr.sd;
    }
    tf_evidence_target t = {d, &ctx, pf_log_prior, pf_worker_new, pf_worker_free, pf_log_lik};
    st = tf_evidence_run(&t, zd, n_z, opt, keys, 3, stop, out, err);
    free(zd);
    if (st == TF_OK) {
        out->n_particles = ctx.n_particles;
        out->loglik_sd = sd;
    }
    return st;
}
