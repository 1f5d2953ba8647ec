/* The PMMH run: pilot, particle tuning, parallel chains, and the fit they make; see pmmh.h. */
#include "sampler/pmmh.h"


#include <math.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* Seconds between progress reports while chains run (about ten a second, as pmmh.h promises). */
#define PROGRESS_EVERY 0.05
/* Further plausible pilot draws a chain tries before it gives up on starting (see run_main). */
#define START_RETRIES 16

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "filter/filter.h"
#include "sampler/chain.h"
#include "sampler/screen.h"
#include "sampler/tune.h"

tf_pmmh_options tf_pmmh_default_options(void)
{
    tf_pmmh_options o = {
        /* Four chains: the number split R-hat is designed around (Vehtari et al. 2021,
         * section 4). */
        .n_chains = 4,
        /* Run length by need (pmmh.h). The run stops at the first block end where every
         * watched quantity has R-hat <= 1.01 and bulk and tail ESS >= 400 (Vehtari, Gelman,
         * Simpson, Carpenter & Buerkner 2021, Bayesian Analysis 16:667, section 4: the
         * thresholds they recommend), after at least 2000 iterations per chain and at most
         * 160000.
         * Stopping when an estimate from the draws themselves passes a threshold biases the
         * result a little towards runs whose estimates happen to look good. Jones, Haran, Caffo
         * & Neath (2006, JASA 101:1537) show that such sequential fixed-width rules stop with the
         * asserted precision asymptotically, and that a minimum run length guards against the
         * early stops that cause most of the trouble; Vats, Flegal & Jones (2019, Biometrika
         * 106:321, section 3 and Theorem 3) show the same for a rule that stops once the
         * multivariate ESS passes a bound, which is what this rule asks of each quantity. The
         * bias is of the order of the Monte Carlo error left at the stop, and at ESS >= 400
         * that error is sd / 20: the exactness check against the exact-likelihood sampler and
         * the coverage check on simulated series (tests/unit/test_pmmh.c,
         * tests/ref/test_fit_recovery.py) run with this rule.
         * 2000 iterations: below that the split-chain ESS and R-hat of 4 chains are themselves
         * too noisy to stop on (common practice, no source); few fits reach ESS 400 that early
         * at PMMH's acceptance rates of 0.1-0.3 anyway. 160000: four times the 40000 that the
         * demo surveys' funnel-shaped posteriors (density-dependent growth with r near 0) once
         * needed with a fixed length, the most the former "doublings" allowed. */
        .min_iter = 2000,
        .max_iter = 160000,
        .min_ess = TF_FIT_ESS_MIN,
        /* Every iteration kept until 1000 per chain are, then every second, and so on: 4000
         * draws of 4 chains are 10 times the ESS the run stops at, enough for the marginal
         * likelihood's mixture fit and the projections' starts (common practice, no source),
         * and everything downstream holds and writes every draw (analyze's workbook has a sheet
         * of them): the three-population demo survey peaked in bench_analyze at 320 MB with
         * 4000 per chain and 186 MB with 2000. Thinning trims memory only: it never adds
         * information (MacEachern & Berliner 1994, The American Statistician 48:188). */
        .thin = 1,
        .max_kept = 1000,
        .n_warmup = 5000,
        .n_threads = 1,
        .seed = 1,
        .n_particles = 0,
        .correlated = 0,
        .proposal = TF_PROPOSAL_GUIDED,
        .rho = 0.99,
        /* The pilot (Monte Carlo within Metropolis from prior draws) only finds the posterior,
         * but a noisy estimate lets it wander: 24 particles with the guided filter saved about a
         * third of a fit's time on the heron colony, and made the pilot of exponential +
         * rounded log-normal on small counts with a zero stray where the tuning then asked for
         * 200000 particles (tests/unit/test_compare.c); there the guided filter is no better
         * than the bootstrap one. So 100 for both. */
        .pilot_particles = 100,
        /* Delayed acceptance off: with the guided filter it no longer pays. bench_fit (make
         * bench), fixed length, 2 seeds each, ESS per second delayed / standard. With the
         * bootstrap filter (100-340 particles) it won for Poisson counts (heron gompertz 2.5,
         * squirrel ricker 2.2, north-valley ricker 4.4), was mixed for the negative binomial
         * (river-flats theta-logistic 1.3; heron gompertz 1.1 and 1.8, ricker 0.64 and 1.07 by
         * hand) and lost for the log-normal (heron exponential 0.57). With the guided filter,
         * tuned to 10 particles, a filter run costs little more than the screen and the chain
         * step: 1.21, 0.85, 1.30, 1.12 and 0.32 on the same cases (geometric mean 0.86), gains
         * within the noise of two seeds beside a large loss. The second stage accepts with the
         * ratio of (estimate / screen) between the two points, so it sees as noise the estimate's noise and how the screen's
         * error changes between points, and the chain mixes worse per iteration; that only pays
         * where a filter run is expensive. --delayed-acceptance on remains for such fits (the
         * bootstrap filter on large counts). */
        .delayed = 0,
    };
    return o;
}

/* Stream keys beyond any chain index: the pilot centre's tuning draws. */
#define TUNE_STREAM_KEY UINT64_C(0x74756e65)   /* "tune" */
/* Log-target units left for the noise of the pilot's estimates (pilot_summary): a few times
 * their SD of 1-2 at the pilot's particle count (common practice, no source). */
#define PILOT_NOISE_ALLOWANCE 8.0
/* Points the particle tuning measures the spread at (tune.h): the pilot centre and 7 draws. */
#define TUNE_POINTS 8
/* Tries at drawing a chain start from the prior that has a finite likelihood estimate. */
#define MAX_START_TRIES 200
/* The most draws of each pilot's second half that the pilot summary keeps: the second half of
 * the default warm-up's pilot (5000 / 4), so that the defaults keep every draw. A longer warm-up
 * keeps every k-th, which leaves the median and covariance they give as good while peak memory
 * stays flat in the warm-up (nothing of it is kept). */
#define PILOT_MAX_KEPT 1250
/* Prior draws used to scale the pilot's first proposal. */
#define N_PRIOR_SCALE_DRAWS 2000
/* The pilot's first proposal has 1/10 of the prior's spread in each coordinate: wide enough to
 * leave a poor start quickly, and the global scale adaptation corrects it either way (common
 * practice, no source). */
#define PILOT_PROPOSAL_FRACTION 0.1
/* Acceptance the pilot's scale adaptation aims at: 0.234, the random-walk optimum in many
 * dimensions (Roberts, Gelman & Gilks 1997). */
#define PILOT_TARGET_ACCEPT 0.234

/* ---- the likelihood side of the chain's target ---- */

typedef struct {
    const tf_posterior *post;
    tf_filter *filter;
    tf_screen *screen;   /* delayed acceptance's screen; NULL when off */
    size_t n_move;
} lik_ctx;

static double log_screen_cb(void *ctx, const double *theta)
{
    const lik_ctx *l = ctx;
    return tf_screen_loglik(l->screen, theta);
}

static double log_prior_cb(void *ctx, const double *z, double *theta)
{
    const lik_ctx *l = ctx;
    return tf_posterior_log_prior_z(l->post, z, theta);
}

static double log_lik_standard(void *ctx, const double *theta, const double *aux, tf_rng *rng,
                               double *path)
{
    const lik_ctx *l = ctx;
    (void)aux;
    return tf_filter_loglik(l->filter, theta, rng, path);
}

/* The auxiliary normals are laid out [z_move | z_pick]. */
static double log_lik_fixed(void *ctx, const double *theta, const double *aux, tf_rng *rng,
                            double *path)
{
    const lik_ctx *l = ctx;
    (void)rng;
    return tf_filter_loglik_fixed(l->filter, theta, aux, aux + l->n_move, path);
}

/* ---- one chain's job ---- */

typedef struct run run;

typedef struct {
    run *r;
    size_t index;
    tf_rng rng;
    lik_ctx lik;
    tf_chain *chain;
    double *pilot_z;          /* [n_pilot_kept][dim]: second half of the pilot, every
                               * pilot_stride-th draw up to its last */
    double *pilot_lt;         /* [n_pilot_kept]: their log target (estimate + log prior) */
    atomic_size_t done;
    atomic_size_t accepted;   /* in the current phase */
    atomic_size_t steps;      /* in the current phase */
    double screened;          /* share of the kept draws' proposals the screen rejected */
    tf_status status;
    tf_error err;
} job;

struct run {
    const tf_posterior *post;
    const tf_model *model;
    const tf_series *series;
    tf_pmmh_options opt;
    const volatile sig_atomic_t *stop;
    size_t dim, n_years;
    size_t n_pilot, n_pilot_kept, pilot_stride, n_warm;
    double *prior_cov;        /* pilot's first proposal */
    double *centre_z, *pilot_cov;
    /* Pooled pilot draws that look like posterior draws (see pilot_summary), as indices
     * c * n_pilot_kept + t in pooled order. */
    size_t *plausible;
    size_t n_plausible;
    size_t n_particles;
    tf_fit *fit;
    job *jobs;
    atomic_size_t next_job;
    atomic_size_t n_finished;
    atomic_int stop_now;
    int inline_work;          /* the calling thread runs the chains itself */
    /* Kept draws: thinning in force, the block's draw indices to record [keep_from, keep_to),
     * and the iterations since the last kept draw that are already behind the chain (after
     * tf_fit_halve). */
    size_t thin, keep_from, keep_to, behind;
    size_t total;             /* iterations per chain so far planned, for progress */
    tf_pmmh_phase phase;
};

/* Workers read the atomic copy; the caller's flag is read on the calling thread only. */
static int stopped(run *r)
{
    if (r->stop && *r->stop)
        atomic_store(&r->stop_now, 1);
    return atomic_load_explicit(&r->stop_now, memory_order_relaxed) != 0;
}
static int worker_stopped(run *r)
{
    if (r->inline_work)
        return stopped(r);
    return atomic_load_explicit(&r->stop_now, memory_order_relaxed) != 0;
}

/* Pooled pilot draw idx = chain * n_pilot_kept + row. */
static const double *pooled_z(const run *r, size_t idx)
{
    return r->jobs[idx / r->n_pilot_kept].pilot_z + (idx % r->n_pilot_kept) * r->dim;
}

static void count_step(job *j, int accepted)
{
    atomic_fetch_add_explicit(&j->done, 1, memory_order_relaxed);
    atomic_fetch_add_explicit(&j->steps, 1, memory_order_relaxed);
    if (accepted)
        atomic_fetch_add_explicit(&j->accepted, 1, memory_order_relaxed);
}

static void reset_phase_counts(job *j)
{
    atomic_store_explicit(&j->steps, 0, memory_order_relaxed);
    atomic_store_explicit(&j->accepted, 0, memory_order_relaxed);
}

/* Pilot: a start drawn from the prior, then Monte Carlo within Metropolis with adaptation, so
 * that a far-off start cannot stick at one lucky estimate. */
static tf_status run_pilot(job *j)
{
    run *r = j->r;
    size_t d = r->dim;
    j->lik.post = r->post;
    j->lik.filter = tf_filter_alloc(r->model, r->series, r->opt.pilot_particles);
    tf_filter_set_proposal(j->lik.filter, r->opt.proposal);
    tf_chain_target t = {.dim = d, .n_path = r->n_years, .ctx = &j->lik,
                         .log_prior = log_prior_cb, .log_lik = log_lik_standard};
    tf_chain_options co = tf_chain_default_options();
    co.target_accept = PILOT_TARGET_ACCEPT;
    co.init_weight = 20;
    j->chain = j->lik.filter ? tf_chain_alloc(&t, &co) : NULL;
    if (!j->chain)
        return tf_error_add(&j->err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for a chain");

    double z0[TF_CHAIN_MAX_DIM], theta0[TF_CHAIN_MAX_DIM];
    tf_status st = TF_ERR_NUMERIC;
    for (size_t k = 0; k < MAX_START_TRIES && st != TF_OK; k++) {
        if (worker_stopped(r))
            return TF_ERR_INTERRUPTED;
        tf_posterior_draw(r->post, &j->rng, theta0, z0);
        st = tf_chain_init(j->chain, z0, r->prior_cov, &j->rng, NULL);
        /* init copies the stream; carry on from where it left off so each try draws afresh */
        j->rng = tf_chain_rng(j->chain);
    }
    if (st != TF_OK)
        return tf_error_add(&j->err, TF_ERR_NUMERIC, NULL, 0, 0,
                            "check the priors and the survey; --particles with a larger count may help",
                            "no starting point drawn from the prior gave a finite likelihood "
                            "(%d tries)", MAX_START_TRIES);
    tf_chain_set_refresh(j->chain, 1);
    reset_phase_counts(j);
    for (size_t it = 0; it < r->n_pilot; it++) {
        if (worker_stopped(r))
            return TF_ERR_INTERRUPTED;
        count_step(j, tf_chain_step(j->chain));
        size_t back = r->n_pilot - 1 - it;   /* steps before the pilot's last */
        if (back % r->pilot_stride == 0 && back / r->pilot_stride < r->n_pilot_kept) {
            size_t row = r->n_pilot_kept - 1 - back / r->pilot_stride;
            memcpy(j->pilot_z + row * d, tf_chain_z(j->chain), d * sizeof(double));
            j->pilot_lt[row] = tf_chain_loglik(j->chain) + tf_chain_logprior(j->chain);
        }
    }
    return TF_OK;
}

/* Warm-up and kept draws: the exact PMMH chain with the tuned particle count, from the pilot's
 * end point, its proposal started at the pooled pilot covariance. */
static tf_status run_main(job *j)
{
    run *r = j->r;
    size_t d = r->dim;
    /* Start where the pilot chain ended if that looks like a posterior draw; otherwise at a
     * plausible pilot draw, a different one for each chain so that the starts stay apart. */
    double z0[TF_CHAIN_MAX_DIM];
    size_t last = (j->index + 1) * r->n_pilot_kept - 1, pos = 0;
    while (pos < r->n_plausible && r->plausible[pos] != last)
        pos++;
    if (pos < r->n_plausible)
        memcpy(z0, tf_chain_z(j->chain), d * sizeof(double));
    else
        memcpy(z0, pooled_z(r, r->plausible[(2 * j->index + 1) * r->n_plausible / (2 * r->opt.n_chains)]),
               d * sizeof(double));
    j->rng = tf_chain_rng(j->chain);
    tf_chain_free(j->chain);
    j->chain = NULL;
    tf_filter_free(j->lik.filter);
    j->lik.filter = tf_filter_alloc(r->model, r->series, r->n_particles);
    tf_filter_set_proposal(j->lik.filter, r->opt.proposal);
    if (!j->lik.filter)
        return tf_error_add(&j->err, TF_ERR_NOMEM, NULL, 0, 0, NULL,
                            "out of memory for a particle filter with %zu particles",
                            r->n_particles);
    tf_chain_target t = {.dim = d, .n_path = r->n_years, .ctx = &j->lik,
                         .log_prior = log_prior_cb, .log_lik = log_lik_standard};
    tf_chain_options co = tf_chain_default_options();
    if (r->opt.delayed) {
        if (!(j->lik.screen = tf_screen_alloc(r->model, r->series)))
            return tf_error_add(&j->err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for a chain");
        t.log_screen = log_screen_cb;
    }
    if (r->opt.correlated) {
        j->lik.n_move = tf_filter_n_move(j->lik.filter);
        t.n_aux = j->lik.n_move + tf_filter_n_pick(j->lik.filter);
        t.log_lik = log_lik_fixed;
        co.rho = r->opt.rho;
    }
    j->chain = tf_chain_alloc(&t, &co);
    if (!j->chain)
        return tf_error_add(&j->err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for a chain");
    tf_status st = tf_chain_init(j->chain, z0, r->pilot_cov, &j->rng, NULL);
    if (st == TF_ERR_NUMERIC) /* the pilot's end point failed with the new filter: try the centre */
        st = tf_chain_init(j->chain, r->centre_z, r->pilot_cov, &j->rng, NULL);
    /* One estimate of -inf at a plausible point is bad luck with the random numbers, not a verdict
     * on the point (a rare event at the tuned particle count, seen with the rounding of unoptimised
     * builds). Where the chain starts does not affect which distribution it converges to, so try
     * further plausible pilot draws, each with fresh random numbers from this chain's own stream
     * (the run stays reproducible). */
    for (size_t a = 0; st == TF_ERR_NUMERIC && a < START_RETRIES && r->n_plausible; a++)
        st = tf_chain_init(j->chain, pooled_z(r, r->plausible[(j->index + 7 * a) % r->n_plausible]),
                           r->pilot_cov, &j->rng, NULL);
    if (st != TF_OK)
        return tf_error_add(&j->err, st, NULL, 0, 0, NULL,
                            "chain %zu could not start its exact phase: the likelihood estimate "
                            "is not finite at the pilot's end point or centre", j->index + 1);

    reset_phase_counts(j);
    for (size_t it = 0; it < r->n_warm; it++) {
        if (worker_stopped(r))
            return TF_ERR_INTERRUPTED;
        count_step(j, tf_chain_step(j->chain));
    }
    /* Freeze the proposal: the kept draws come from a fixed Metropolis-Hastings kernel
     * (Andrieu & Thoms 2008, section 2: adaptation that never stops needs extra conditions). */
    tf_chain_set_adapt(j->chain, 0);
    tf_chain_reset_counts(j->chain);
    reset_phase_counts(j);
    return TF_OK;
}

/* One block: the kept draws from index r->keep_from to r->keep_to, r->thin iterations apart,
 * the first r->behind iterations early because they were run before (see tf_pmmh_run's
 * halvings). */
static tf_status run_kept(job *j)
{
    run *r = j->r;
    for (size_t it = r->keep_from; it < r->keep_to; it++) {
        size_t steps = r->thin - (it == r->keep_from ? r->behind : 0);
        for (size_t k = 0; k < steps; k++) {
            if (worker_stopped(r))
                return TF_ERR_INTERRUPTED;
            count_step(j, tf_chain_step(j->chain));
        }
        tf_fit_record(r->fit, j->index, it, tf_chain_theta(j->chain), tf_chain_loglik(j->chain),
                      tf_chain_path(j->chain));
    }
    double n = (double)tf_chain_n_steps(j->chain);
    tf_fit_set_chain_stats(r->fit, j->index, (double)tf_chain_n_accepted(j->chain) / n,
                           (double)tf_chain_n_invalid(j->chain) / n);
    j->screened = (double)tf_chain_n_screened(j->chain) / n;
    return TF_OK;
}

/* ---- threads ---- */

typedef struct {
    run *r;
    tf_status (*fn)(job *);
} worker_arg;

static void *worker(void *arg)
{
    worker_arg *w = arg;
    run *r = w->r;
    for (;;) {
        size_t k = atomic_fetch_add(&r->next_job, 1);
        if (k >= r->opt.n_chains)
            break;
        job *j = &r->jobs[k];
        j->status = w->fn(j);
        atomic_fetch_add(&r->n_finished, 1);
    }
    return NULL;
}

static double now_seconds(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

typedef struct {
    tf_pmmh_progress_fn fn;
    void *ctx;
    double t0;
    size_t *done;
    double *acceptance;
} progress_state;

static void report(run *r, progress_state *ps)
{
    if (!ps->fn)
        return;
    for (size_t c = 0; c < r->opt.n_chains; c++) {
        job *j = &r->jobs[c];
        ps->done[c] = atomic_load_explicit(&j->done, memory_order_relaxed);
        size_t steps = atomic_load_explicit(&j->steps, memory_order_relaxed);
        size_t acc = atomic_load_explicit(&j->accepted, memory_order_relaxed);
        ps->acceptance[c] = steps ? (double)acc / (double)steps : NAN;
    }
    tf_pmmh_progress p = {.phase = r->phase, .n_chains = r->opt.n_chains, .done = ps->done,
                          .total = r->total,
                          .acceptance = ps->acceptance, .n_particles = r->n_particles,
                          .seconds = now_seconds() - ps->t0};
    ps->fn(ps->ctx, &p);
}

/* Runs fn for every chain on n_threads worker threads while this thread reports progress and
 * passes the caller's stop flag on to the workers. Returns the first failing chain's status
 * (its messages copied into err), in chain order so that the error does not depend on the
 * thread count either. */
static tf_status run_phase(run *r, tf_status (*fn)(job *), progress_state *ps, tf_error *err)
{
    size_t n_threads = r->opt.n_threads < r->opt.n_chains ? r->opt.n_threads : r->opt.n_chains;
    pthread_t *th = malloc(n_threads * sizeof *th);
    if (!th)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    worker_arg w = {r, fn};
    atomic_store(&r->next_job, 0);
    atomic_store(&r->n_finished, 0);
    /* Workers do not take SIGINT / SIGTERM: the handler then runs on this thread, which polls
     * the flag it sets (POSIX leaves the choice of thread to the system otherwise). */
    sigset_t block, old;
    sigemptyset(&block);
    sigaddset(&block, SIGINT);
    sigaddset(&block, SIGTERM);
    pthread_sigmask(SIG_BLOCK, &block, &old);
    size_t started = 0;
    while (started < n_threads && pthread_create(&th[started], NULL, worker, &w) == 0)
        started++;
    pthread_sigmask(SIG_SETMASK, &old, NULL);
    if (started == 0) {
        r->inline_work = 1;   /* no thread could be made: do the work here */
        worker(&w);
        r->inline_work = 0;
    } else {
        /* Naps of 1 ms: a run by need ends a phase at every block, and with 10 particles a block
         * can take a few milliseconds, so 50 ms naps had made the checks' waiting most of the run
         * (2.1 s against 1.2 s for the same iterations in fewer blocks). Progress is still
         * reported about every PROGRESS_EVERY seconds. */
        double last = now_seconds();
        while (atomic_load(&r->n_finished) < r->opt.n_chains) {
            if (r->stop && *r->stop)
                atomic_store(&r->stop_now, 1);
            struct timespec nap = {0, 1000 * 1000};
            nanosleep(&nap, NULL);
            if (now_seconds() - last >= PROGRESS_EVERY) {
                report(r, ps);
                last = now_seconds();
            }
        }
    }
    for (size_t i = 0; i < started; i++)
        pthread_join(th[i], NULL);
    free(th);
    report(r, ps);
    if (stopped(r))
        return tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
    for (size_t c = 0; c < r->opt.n_chains; c++) {
        job *j = &r->jobs[c];
        if (j->status != TF_OK) {
            for (size_t i = 0; i < j->err.n_items; i++) {
                const tf_error_item *e = &j->err.items[i];
                tf_error_add(err, e->status, e->file[0] ? e->file : NULL, e->line, e->column,
                             e->hint[0] ? e->hint : NULL, "%s", e->what);
            }
            if (j->err.n_items == 0)
                tf_error_add(err, j->status, NULL, 0, 0, NULL, "chain %zu failed", c + 1);
            return j->status;
        }
    }
    return TF_OK;
}

/* ---- the pilot centre and covariance ---- */

/* Prior spread in z: the pilot's first proposal is diagonal with PILOT_PROPOSAL_FRACTION of the
 * prior's sd per coordinate. Uses its own stream so that it does not depend on the chains. */
static tf_status prior_proposal(run *r, tf_rng *rng, tf_error *err)
{
    size_t d = r->dim;
    double *zs = malloc(N_PRIOR_SCALE_DRAWS * d * sizeof(double));
    if (!zs)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    double theta[TF_CHAIN_MAX_DIM];
    for (size_t k = 0; k < N_PRIOR_SCALE_DRAWS; k++)
        tf_posterior_draw(r->post, rng, theta, zs + k * d);
    memset(r->prior_cov, 0, d * d * sizeof(double));
    for (size_t i = 0; i < d; i++) {
        double sd = gsl_stats_sd(zs + i, d, N_PRIOR_SCALE_DRAWS);
        if (!(sd > 0) || !isfinite(sd))
            sd = 1.0;
        double s = PILOT_PROPOSAL_FRACTION * sd;
        r->prior_cov[i * d + i] = s * s;
    }
    free(zs);
    return TF_OK;
}

/* Sorts out the pooled second halves of the pilot chains. A pilot chain can still be on its way
 * from a poor start, or lingering where the estimates are very noisy, so only draws whose log
 * target is within PLAUSIBLE_DROP of the best are used: under a normal approximation of the
 * posterior, -2 (log target - its maximum) of a posterior draw is chi-square with d degrees of
 * freedom (the Bernstein-von Mises limit), so draws more than half the 99.9 % quantile below the
 * best are unlikely posterior draws; PILOT_NOISE_ALLOWANCE more is left for the noise of the
 * pilot's estimates, which also inflates the best one.
 * From those: the centre is the coordinate-wise median, the covariance their sample covariance. */
static tf_status pilot_summary(run *r, tf_error *err)
{
    size_t d = r->dim, n = r->opt.n_chains * r->n_pilot_kept;
    double *x = malloc(n * sizeof(double)), *centre = r->centre_z;
    r->plausible = malloc(n * sizeof *r->plausible);
    if (!x || !r->plausible) {
        free(x);
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    }
    double best = -INFINITY;
    for (size_t k = 0; k < n; k++)
        best = fmax(best, r->jobs[k / r->n_pilot_kept].pilot_lt[k % r->n_pilot_kept]);
    double drop = 0.5 * gsl_cdf_chisq_Pinv(0.999, (double)d) + PILOT_NOISE_ALLOWANCE;
    r->n_plausible = 0;
    for (size_t k = 0; k < n; k++)
        if (r->jobs[k / r->n_pilot_kept].pilot_lt[k % r->n_pilot_kept] >= best - drop)
            r->plausible[r->n_plausible++] = k;
    size_t m = r->n_plausible;   /* >= 1: the best draw itself */

    for (size_t i = 0; i < d; i++) {
        for (size_t k = 0; k < m; k++)
            x[k] = pooled_z(r, r->plausible[k])[i];
        gsl_sort(x, 1, m);
        centre[i] = gsl_stats_median_from_sorted_data(x, 1, m);
    }
    double mu[TF_CHAIN_MAX_DIM] = {0};
    for (size_t k = 0; k < m; k++)
        for (size_t i = 0; i < d; i++)
            mu[i] += pooled_z(r, r->plausible[k])[i] / (double)m;
    memset(r->pilot_cov, 0, d * d * sizeof(double));
    for (size_t k = 0; m > 1 && k < m; k++) {
        const double *z = pooled_z(r, r->plausible[k]);
        for (size_t i = 0; i < d; i++)
            for (size_t l = 0; l < d; l++)
                r->pilot_cov[i * d + l] += (z[i] - mu[i]) * (z[l] - mu[l]) / (double)(m - 1);
    }
    /* A pilot that never moved in some coordinate leaves a zero variance: fall back to the
     * prior-based proposal there so the matrix stays positive definite. */
    for (size_t i = 0; i < d; i++)
        if (!(r->pilot_cov[i * d + i] > 1e-12)) {
            for (size_t k = 0; k < d; k++)
                r->pilot_cov[i * d + k] = r->pilot_cov[k * d + i] = 0.0;
            r->pilot_cov[i * d + i] = r->prior_cov[i * d + i];
        }
    free(x);
    return TF_OK;
}

static void free_run(run *r)
{
    if (r->jobs)
        for (size_t c = 0; c < r->opt.n_chains; c++) {
            tf_chain_free(r->jobs[c].chain);
            tf_filter_free(r->jobs[c].lik.filter);
            tf_screen_free(r->jobs[c].lik.screen);
            free(r->jobs[c].pilot_z);
            free(r->jobs[c].pilot_lt);
        }
    free(r->jobs);
    free(r->prior_cov);
    free(r->centre_z);
    free(r->pilot_cov);
    free(r->plausible);
    tf_fit_free(r->fit);
}

tf_status tf_pmmh_run(const tf_posterior *post, const tf_series *s, const tf_pmmh_options *opt,
                      const volatile sig_atomic_t *stop, tf_pmmh_progress_fn progress,
                      void *progress_ctx, tf_fit **out, tf_error *err)
{
    *out = NULL;
    if (opt->n_chains == 0 || opt->n_chains > TF_FIT_MAX_CHAINS || opt->thin == 0 ||
        opt->min_iter < opt->thin || opt->max_iter < opt->min_iter || opt->max_kept < 8 ||
        !(opt->min_ess > 0) || opt->n_threads == 0 || opt->n_warmup < 20 ||
        opt->pilot_particles == 0 || !(opt->rho >= 0 && opt->rho < 1))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0,
                            "chains and threads must be >= 1, thin <= minimum iterations <= maximum, "
                            ">= 8 kept draws, ESS target > 0, warm-up >= 20, rho in [0, 1)",
                            "unusable sampler settings");
    run r = {.post = post, .model = tf_posterior_model(post), .series = s, .opt = *opt,
             .stop = stop, .phase = TF_PMMH_PILOT};
    atomic_init(&r.stop_now, 0);
    r.dim = tf_posterior_dim(post);
    r.n_years = tf_series_n_years(s);
    /* The warm-up is split evenly: the pilot (approximate, cheap) and the exact chain's own
     * adaptation with the tuned particle count. */
    r.n_pilot = opt->n_warmup / 2;
    r.n_warm = opt->n_warmup - r.n_pilot;
    r.n_pilot_kept = r.n_pilot / 2;
    r.thin = opt->thin;
    r.total = opt->n_warmup + opt->min_iter;
    r.pilot_stride = 1;
    if (r.n_pilot_kept > PILOT_MAX_KEPT) {
        r.pilot_stride = (r.n_pilot_kept + PILOT_MAX_KEPT - 1) / PILOT_MAX_KEPT;
        r.n_pilot_kept /= r.pilot_stride;
    }
    double t0 = now_seconds();

    tf_status st = TF_ERR_NOMEM;
    size_t d = r.dim;
    size_t *done = calloc(opt->n_chains, sizeof *done);
    double *acceptance = calloc(opt->n_chains, sizeof *acceptance);
    r.jobs = calloc(opt->n_chains, sizeof *r.jobs);
    r.prior_cov = malloc(d * d * sizeof(double));
    r.centre_z = malloc(d * sizeof(double));
    r.pilot_cov = malloc(d * d * sizeof(double));
    r.fit = tf_fit_alloc(r.model, s, opt->n_chains, opt->max_kept);
    if (!done || !acceptance || !r.jobs || !r.prior_cov || !r.centre_z || !r.pilot_cov || !r.fit)
        goto nomem;
    uint64_t keys[3] = {tf_rng_key(tf_series_label(s)), tf_rng_key(tf_model_name(r.model)), 0};
    for (size_t c = 0; c < opt->n_chains; c++) {
        job *j = &r.jobs[c];
        j->r = &r;
        j->index = c;
        keys[2] = c;
        tf_rng_derive(&j->rng, opt->seed, keys, 3);
        tf_error_init(&j->err);
        atomic_init(&j->done, 0);
        atomic_init(&j->accepted, 0);
        atomic_init(&j->steps, 0);
        j->pilot_z = malloc(r.n_pilot_kept * d * sizeof(double));
        j->pilot_lt = malloc(r.n_pilot_kept * sizeof(double));
        if (!j->pilot_z || !j->pilot_lt)
            goto nomem;
    }
    progress_state ps = {progress, progress_ctx, t0, done, acceptance};

    tf_rng tune_rng;
    keys[2] = TUNE_STREAM_KEY;
    tf_rng_derive(&tune_rng, opt->seed, keys, 3);
    if ((st = prior_proposal(&r, &tune_rng, err)) != TF_OK)
        goto fail;
    if ((st = run_phase(&r, run_pilot, &ps, err)) != TF_OK)
        goto fail;
    if ((st = pilot_summary(&r, err)) != TF_OK)
        goto fail;

    r.phase = TF_PMMH_TUNE;
    report(&r, &ps);
    /* The points the spread is measured at: the pilot centre, then plausible pilot draws spread
     * evenly over the pooled second halves (in chain order, so every chain can contribute). */
    double points[TUNE_POINTS * TF_CHAIN_MAX_DIM];
    size_t n_points = 1;
    tf_posterior_log_prior_z(post, r.centre_z, points);
    for (size_t k = 1; k < TUNE_POINTS && k <= r.n_plausible; k++) {
        size_t idx = r.plausible[(k - 1) * r.n_plausible / (TUNE_POINTS - 1)];
        if (isfinite(tf_posterior_log_prior_z(post, pooled_z(&r, idx), points + n_points * d)))
            n_points++;
    }
    tf_tune_result tr;
    tf_tune_options to = tf_tune_default_options(opt->correlated);
    to.rho = opt->rho;
    to.stop = stop;
    to.proposal = opt->proposal;
    to.start_particles = opt->pilot_particles;
    if (opt->n_particles) {
        /* A count given by the user: one measurement there, to report the spread. */
        to.start_particles = to.min_particles = to.max_particles = opt->n_particles;
        to.max_rounds = 1;
    }
    if ((st = tf_tune_particles(r.model, s, points, n_points, &to, &tune_rng, &tr, err)) != TF_OK)
        goto fail;
    r.n_particles = tr.n_particles;

    r.phase = TF_PMMH_MAIN;
    if ((st = run_phase(&r, run_main, &ps, err)) != TF_OK)
        goto fail;
    tf_fit_set_posterior(r.fit, post);
    /* Blocks of kept draws until the stopping rule (pmmh.h) holds at a block's end. The rule
     * reads only the draws, and every chain runs the whole block before it is read, so where the
     * run stops does not depend on the thread count. When the kept draws fill the store, every
     * second one is dropped and the thinning doubles: the chain continues with the same frozen
     * kernel, so the kept draws are exactly those of a run thinned twice as much from the start
     * (the iterations already run since the last draw kept count towards the first new one). */
    size_t block = opt->max_kept / TF_PMMH_BLOCKS_PER_STORE, n_kept = 0, n_run = 0,
           n_doublings = 0;
    int stopped_early = 0;
    if (block < 1)
        block = 1;
    r.behind = 0;
    while (n_run < opt->max_iter) {
        if (n_kept + block > opt->max_kept) {
            size_t h = tf_fit_halve(r.fit);
            r.behind = (n_kept - 2 * h) * r.thin;
            n_kept = h;
            r.thin *= 2;
            n_doublings++;
        }
        /* The last block ends at the maximum length, rounded down to a kept draw; the first
         * ends at the minimum when that is shorter than a block. */
        size_t want = block, left = (opt->max_iter - n_run + r.behind) / r.thin;
        if (n_run < opt->min_iter) {
            size_t to_min = (opt->min_iter - n_run + r.behind + r.thin - 1) / r.thin;
            if (to_min < want)
                want = to_min;
        }
        if (left < want)
            want = left;
        if (want == 0)
            break;
        r.keep_from = n_kept;
        r.keep_to = n_kept + want;
        r.total = opt->n_warmup + n_run + want * r.thin - r.behind;
        if ((st = run_phase(&r, run_kept, &ps, err)) != TF_OK)
            goto fail;
        n_run += want * r.thin - r.behind;
        n_kept += want;
        r.behind = 0;
        tf_fit_set_n_iter(r.fit, n_kept);
        if (n_run < opt->min_iter || n_run >= opt->max_iter)
            continue;
        int pass = 0;
        if ((st = tf_fit_check(r.fit, TF_FIT_RHAT_MAX, opt->min_ess, &pass, err)) != TF_OK)
            goto fail;
        if (pass) {
            stopped_early = 1;
            break;
        }
    }
    /* The summaries once, of the draws the run ends with. */
    tf_fit_compact(r.fit);
    tf_fit_set_recent_years(r.fit, opt->recent_years);
    if ((st = tf_fit_summarise(r.fit, err)) != TF_OK)
        goto fail;

    double screened = 0;
    for (size_t c = 0; c < opt->n_chains; c++)
        screened += r.jobs[c].screened / (double)opt->n_chains;
    tf_fit_settings fs = {.n_warmup = opt->n_warmup, .n_iterations = n_run, .thin = r.thin,
                          .delayed = r.opt.delayed, .screened = screened,
                          .n_doublings = n_doublings, .stopped_early = stopped_early,
                          .n_particles = r.n_particles,
                          .loglik_sd = tr.sd, .correlated = opt->correlated, .rho = opt->rho,
                          .proposal = opt->proposal,
                          .seed = opt->seed, .seconds = now_seconds() - t0};
    tf_fit_set_settings(r.fit, &fs);
    *out = r.fit;
    r.fit = NULL;
    free_run(&r);
    free(done);
    free(acceptance);
    return TF_OK;

nomem:
    st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory setting up the chains");
fail:
    free_run(&r);
    free(done);
    free(acceptance);
    return st;
}
