/* What the correlated pseudo-marginal method (Deligiannidis, Doucet & Pitt 2018) buys over the
 * standard one on the demo surveys: effective samples per second of wall-clock time, the
 * smallest bulk ESS over the parameters divided by the run's time, each method with its own
 * tuned particle count, same chains, iterations and seeds. The summary line gives the geometric
 * mean over cases and seeds of the ratio correlated / standard: above 1 the correlated method
 * wins.
 * Then what PMMH costs against sampling with the exact likelihood where one exists: Gompertz
 * growth with log-normal counting error is linear-Gaussian on the log scale, so the Kalman filter
 * gives its likelihood (tests/unit/kalman_ref.h, the reference of the exactness test). A plain
 * Metropolis-Hastings run on it with the same priors, transforms, chains, warm-up schedule,
 * proposal adaptation and kept draws as PMMH is the yardstick; the ratio of the two ESS per
 * second is PMMH's efficiency relative to it.
 * The runs keep analyze's default length (2500 kept draws per chain, 20000 iterations at
 * thinning 8), half the fit command's: ESS per second does not depend on the length once the
 * chains have mixed, and the full length made this benchmark take over two minutes by itself.
 * Runs from the repository root (make bench). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <pthread.h>
#include <time.h>
#include <unistd.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_statistics_double.h>

#include "cmd/setup.h"
#include "model/model.h"
#include "sampler/chain.h"
#include "sampler/diagnostics.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "sampler/posterior.h"
#include "sampler/screen.h"
#include "survey/survey.h"

#include "setup.h"

#include "../tests/unit/kalman_ref.h"

typedef struct {
    const char *file, *population, *growth, *obs;
} bench_case;

static const bench_case cases[] = {
    {"surveys/heron-colony.csv", NULL, "gompertz", "poisson"},
    {"surveys/squirrel-transect.csv", NULL, "ricker", "poisson"},
    {"surveys/three-herds.csv", "north-valley", "ricker", "poisson"},
    {"surveys/three-herds.csv", "river-flats", "theta-logistic", "negbin"},
    {"surveys/heron-colony.csv", NULL, "exponential", "lognormal"},
};
#define N_CASES (sizeof cases / sizeof cases[0])
#define N_SEEDS 2
/* Kept draws per chain: analyze's default (see the top of the file). */
#define KEPT 2500
/* A fixed length for the comparison of kernels: KEPT draws every THIN-th iteration. */
#define THIN 8

static tf_pmmh_options fixed_options(void)
{
    tf_pmmh_options o = tf_pmmh_default_options();
    o.thin = THIN;
    o.min_iter = o.max_iter = KEPT * THIN;
    o.max_kept = KEPT;
    return o;
}

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

typedef struct {
    double seconds, ess_bulk, ess_tail, rhat, loglik_sd, acceptance;
    size_t n_particles;
    /* The exact-likelihood runs only: the parameter of the smallest bulk ESS, and the largest
     * posterior correlation between two parameters (of their logs where positive), its pair. */
    size_t worst;
    double max_corr;
    size_t corr_i, corr_j;
} outcome;

/* The variants of PMMH measured: the kernel at a fixed length, standard, correlated, or standard
 * with delayed acceptance; and the default run, by need (pmmh.h). */
enum { V_STANDARD, V_CORRELATED, V_DELAYED, V_BY_NEED, N_VARIANTS };
static const char *const variant_name[N_VARIANTS] = {"standard", "correlated", "delayed", "by-need"};

static tf_pmmh_options variant_options(int variant, uint64_t seed)
{
    tf_pmmh_options opt = variant == V_BY_NEED ? tf_pmmh_default_options() : fixed_options();
    if (variant != V_BY_NEED)
        opt.delayed = variant == V_DELAYED;
    opt.correlated = variant == V_CORRELATED;
    opt.seed = seed;
    opt.n_threads = 2;
    return opt;
}

static int run_one(const tf_posterior *post, const tf_series *s, int variant, uint64_t seed, outcome *o)
{
    tf_pmmh_options opt = variant_options(variant, seed);
    tf_error err;
    tf_error_init(&err);
    tf_fit *fit = NULL;
    double t0 = now();
    if (tf_pmmh_run(post, s, &opt, NULL, NULL, NULL, &fit, &err) != TF_OK) {
        tf_error_print(&err, "bench_fit", stderr);
        return 0;
    }
    o->seconds = now() - t0;
    o->ess_bulk = o->ess_tail = INFINITY;
    o->rhat = 0;
    for (size_t p = 0; p < tf_fit_n_params(fit); p++) {
        const tf_fit_param_summary *ps = tf_fit_param(fit, p);
        o->ess_bulk = fmin(o->ess_bulk, ps->ess_bulk);
        o->ess_tail = fmin(o->ess_tail, ps->ess_tail);
        o->rhat = fmax(o->rhat, ps->rhat);
    }
    o->acceptance = 0;
    for (size_t c = 0; c < tf_fit_n_chains(fit); c++)
        o->acceptance += tf_fit_acceptance(fit, c) / (double)tf_fit_n_chains(fit);
    o->loglik_sd = tf_fit_settings_of(fit)->loglik_sd;
    o->n_particles = tf_fit_settings_of(fit)->n_particles;
    tf_fit_free(fit);
    return 1;
}

/* ---- PMMH against Metropolis-Hastings with the exact likelihood ---- */

/* The exact sampler repeats sampler/pmmh.c's schedule with the Kalman likelihood in place of the
 * particle filter: a pilot over the first half of the warm-up from a prior draw, its first
 * proposal diagonal with 1/10 of the prior's sd per coordinate (from 2000 prior draws), the
 * global scale adapted towards acceptance 0.234 and the initial covariance weighted 20; then,
 * from the pilot's end point (or a plausible pilot draw), the pooled covariance of the pilots'
 * plausible second halves, Haario adaptation over the rest of the warm-up, frozen for the kept
 * draws. Plausible: log target within half the chi-square(d) 99.9 % quantile of the best, as in
 * pmmh.c but without its allowance for noisy estimates, which the exact likelihood has not. */
#define EXACT_PRIOR_DRAWS 2000
#define EXACT_PILOT_FRACTION 0.1
#define EXACT_PILOT_ACCEPT 0.234
#define EXACT_START_TRIES 200
#define EXACT_THREADS 2

typedef struct exact_run exact_run;

typedef struct {
    exact_run *r;
    size_t index;
    kalman_target kt;
    tf_screen *sc;                /* the deterministic stand-in likelihood when approx */
    tf_rng rng;
    tf_chain *chain;
    double *pilot_z, *pilot_lt;   /* [n_pilot_kept][dim], [n_pilot_kept] */
    double *draws;                /* [n_iter][dim], natural scale */
    double acceptance;
    int ok;
} exact_chain;

struct exact_run {
    int approx;   /* 0: the Kalman likelihood; 1: the screen of delayed acceptance (screen.h) */
    const tf_posterior *post;
    const tf_series *s;
    tf_pmmh_options opt;
    size_t dim, n_pilot, n_pilot_kept, n_warm;
    double prior_cov[TF_CHAIN_MAX_DIM * TF_CHAIN_MAX_DIM], pool_cov[TF_CHAIN_MAX_DIM * TF_CHAIN_MAX_DIM];
    size_t *plausible, n_plausible;
    exact_chain *chains;
};

static const double *exact_pooled(const exact_run *r, size_t idx)
{
    return r->chains[idx / r->n_pilot_kept].pilot_z + (idx % r->n_pilot_kept) * r->dim;
}

static double screen_target_log_prior(void *ctx, const double *z, double *theta)
{
    const exact_chain *e = ctx;
    return tf_posterior_log_prior_z(e->r->post, z, theta);
}

static double screen_target_log_lik(void *ctx, const double *theta, const double *aux, tf_rng *rng, double *path)
{
    const exact_chain *e = ctx;
    (void)aux;
    (void)rng;
    (void)path;
    return tf_screen_loglik(e->sc, theta);
}

static tf_chain_target exact_target(exact_chain *e)
{
    tf_chain_target t = {.dim = e->r->dim, .ctx = &e->kt, .log_prior = kalman_target_log_prior,
                         .log_lik = kalman_target_log_lik};
    if (e->r->approx) {
        t.ctx = e;
        t.log_prior = screen_target_log_prior;
        t.log_lik = screen_target_log_lik;
    }
    return t;
}

static void exact_pilot(exact_chain *e)
{
    exact_run *r = e->r;
    size_t d = r->dim;
    tf_chain_target t = exact_target(e);
    tf_chain_options co = tf_chain_default_options();
    co.target_accept = EXACT_PILOT_ACCEPT;
    co.init_weight = 20;
    e->chain = tf_chain_alloc(&t, &co);
    if (!e->chain)
        return;
    tf_status st = TF_ERR_NUMERIC;
    for (size_t k = 0; k < EXACT_START_TRIES && st != TF_OK; k++) {
        double theta0[TF_CHAIN_MAX_DIM], z0[TF_CHAIN_MAX_DIM];
        tf_posterior_draw(r->post, &e->rng, theta0, z0);
        st = tf_chain_init(e->chain, z0, r->prior_cov, &e->rng, NULL);
        e->rng = tf_chain_rng(e->chain);
    }
    if (st != TF_OK)
        return;
    for (size_t it = 0; it < r->n_pilot; it++) {
        tf_chain_step(e->chain);
        if (it >= r->n_pilot - r->n_pilot_kept) {
            size_t row = it - (r->n_pilot - r->n_pilot_kept);
            memcpy(e->pilot_z + row * d, tf_chain_z(e->chain), d * sizeof(double));
            e->pilot_lt[row] = tf_chain_loglik(e->chain) + tf_chain_logprior(e->chain);
        }
    }
    e->ok = 1;
}

static void exact_main(exact_chain *e)
{
    exact_run *r = e->r;
    size_t d = r->dim;
    double z0[TF_CHAIN_MAX_DIM];
    size_t last = (e->index + 1) * r->n_pilot_kept - 1, pos = 0;
    while (pos < r->n_plausible && r->plausible[pos] != last)
        pos++;
    if (pos < r->n_plausible)
        memcpy(z0, tf_chain_z(e->chain), d * sizeof(double));
    else
        memcpy(z0, exact_pooled(r, r->plausible[(2 * e->index + 1) * r->n_plausible / (2 * r->opt.n_chains)]),
               d * sizeof(double));
    e->rng = tf_chain_rng(e->chain);
    tf_chain_free(e->chain);
    e->ok = 0;
    tf_chain_target t = exact_target(e);
    e->chain = tf_chain_alloc(&t, NULL);
    if (!e->chain || tf_chain_init(e->chain, z0, r->pool_cov, &e->rng, NULL) != TF_OK)
        return;
    for (size_t it = 0; it < r->n_warm; it++)
        tf_chain_step(e->chain);
    tf_chain_set_adapt(e->chain, 0);
    tf_chain_reset_counts(e->chain);
    for (size_t it = 0; it < KEPT; it++) {
        for (size_t k = 0; k < THIN; k++)
            tf_chain_step(e->chain);
        memcpy(e->draws + it * d, tf_chain_theta(e->chain), d * sizeof(double));
    }
    e->acceptance = (double)tf_chain_n_accepted(e->chain) / (double)tf_chain_n_steps(e->chain);
    e->ok = 1;
}

typedef struct {
    exact_run *r;
    size_t first;
    void (*fn)(exact_chain *);
} exact_worker_arg;

static void *exact_worker(void *arg)
{
    exact_worker_arg *a = arg;
    for (size_t c = a->first; c < a->r->opt.n_chains; c += EXACT_THREADS)
        a->fn(&a->r->chains[c]);
    return NULL;
}

/* fn for every chain, chain c on thread c mod EXACT_THREADS, as PMMH runs them on 2 threads. */
static int exact_phase(exact_run *r, void (*fn)(exact_chain *))
{
    pthread_t th[EXACT_THREADS];
    exact_worker_arg a[EXACT_THREADS];
    size_t started = 0;
    for (size_t k = 0; k < EXACT_THREADS; k++) {
        a[k] = (exact_worker_arg){r, k, fn};
        if (pthread_create(&th[k], NULL, exact_worker, &a[k]) != 0)
            break;
        started++;
    }
    for (size_t k = 0; k < started; k++)
        pthread_join(th[k], NULL);
    if (started < EXACT_THREADS)
        for (size_t k = started; k < EXACT_THREADS; k++)
            exact_worker(&a[k]);
    for (size_t c = 0; c < r->opt.n_chains; c++)
        if (!r->chains[c].ok)
            return 0;
    return 1;
}

/* The pilot summary of pmmh.c: plausible pooled draws and their covariance (the prior-based
 * proposal where a coordinate did not move). */
static int exact_pool(exact_run *r)
{
    size_t d = r->dim, n = r->opt.n_chains * r->n_pilot_kept;
    r->plausible = malloc(n * sizeof *r->plausible);
    if (!r->plausible)
        return 0;
    double best = -INFINITY;
    for (size_t k = 0; k < n; k++)
        best = fmax(best, r->chains[k / r->n_pilot_kept].pilot_lt[k % r->n_pilot_kept]);
    double drop = 0.5 * gsl_cdf_chisq_Pinv(0.999, (double)d);
    r->n_plausible = 0;
    for (size_t k = 0; k < n; k++)
        if (r->chains[k / r->n_pilot_kept].pilot_lt[k % r->n_pilot_kept] >= best - drop)
            r->plausible[r->n_plausible++] = k;
    size_t m = r->n_plausible;
    double mu[TF_CHAIN_MAX_DIM] = {0};
    for (size_t k = 0; k < m; k++)
        for (size_t i = 0; i < d; i++)
            mu[i] += exact_pooled(r, r->plausible[k])[i] / (double)m;
    memset(r->pool_cov, 0, sizeof r->pool_cov);
    for (size_t k = 0; m > 1 && k < m; k++) {
        const double *z = exact_pooled(r, r->plausible[k]);
        for (size_t i = 0; i < d; i++)
            for (size_t l = 0; l < d; l++)
                r->pool_cov[i * d + l] += (z[i] - mu[i]) * (z[l] - mu[l]) / (double)(m - 1);
    }
    for (size_t i = 0; i < d; i++)
        if (!(r->pool_cov[i * d + i] > 1e-12)) {
            for (size_t k = 0; k < d; k++)
                r->pool_cov[i * d + k] = r->pool_cov[k * d + i] = 0.0;
            r->pool_cov[i * d + i] = r->prior_cov[i * d + i];
        }
    return 1;
}

/* One exact-likelihood run with PMMH's chains, warm-up, thinning and kept draws; *o gets its
 * time (set-up, chains on 2 threads and diagnostics, as tf_pmmh_run's time holds its own),
 * smallest bulk ESS over the parameters and mean acceptance. */
static int run_exact(const tf_posterior *post, const tf_series *s, int approx, uint64_t seed, outcome *o)
{
    double t0 = now();
    exact_run r = {.approx = approx, .post = post, .s = s, .opt = fixed_options()};
    r.dim = tf_posterior_dim(post);
    r.n_pilot = r.opt.n_warmup / 2;
    r.n_warm = r.opt.n_warmup - r.n_pilot;
    r.n_pilot_kept = r.n_pilot / 2;
    size_t d = r.dim, nc = r.opt.n_chains;
    int ok = 0;
    tf_diag_workspace *w = NULL;
    double *zs = malloc(EXACT_PRIOR_DRAWS * d * sizeof(double));
    r.chains = calloc(nc, sizeof *r.chains);
    if (!zs || !r.chains || d > TF_CHAIN_MAX_DIM)
        goto done;
    uint64_t keys[2] = {tf_rng_key("exact"), 0};
    tf_rng prior_rng;
    tf_rng_derive(&prior_rng, seed, keys, 1);
    double theta[TF_CHAIN_MAX_DIM];
    for (size_t k = 0; k < EXACT_PRIOR_DRAWS; k++)
        tf_posterior_draw(post, &prior_rng, theta, zs + k * d);
    for (size_t i = 0; i < d; i++) {
        double sd = gsl_stats_sd(zs + i, d, EXACT_PRIOR_DRAWS);
        if (!(sd > 0) || !isfinite(sd))
            sd = 1.0;
        r.prior_cov[i * d + i] = EXACT_PILOT_FRACTION * sd * EXACT_PILOT_FRACTION * sd;
    }
    for (size_t c = 0; c < nc; c++) {
        exact_chain *e = &r.chains[c];
        e->r = &r;
        e->index = c;
        keys[1] = c;
        tf_rng_derive(&e->rng, seed, keys, 2);
        e->pilot_z = malloc(r.n_pilot_kept * d * sizeof(double));
        e->pilot_lt = malloc(r.n_pilot_kept * sizeof(double));
        e->draws = malloc(KEPT * d * sizeof(double));
        if (!e->pilot_z || !e->pilot_lt || !e->draws || !kalman_target_init(&e->kt, post, s))
            goto done;
        if (approx && !(e->sc = tf_screen_alloc(tf_posterior_model(post), s)))
            goto done;
    }
    if (!exact_phase(&r, exact_pilot) || !exact_pool(&r) || !exact_phase(&r, exact_main))
        goto done;
    tf_error err;
    tf_error_init(&err);
    if (tf_diag_workspace_alloc(nc, KEPT, &w, &err) != TF_OK)
        goto done;
    o->ess_bulk = INFINITY;
    o->rhat = 0;
    for (size_t p = 0; p < d; p++) {
        const double *chains[TF_FIT_MAX_CHAINS];
        for (size_t c = 0; c < nc; c++)
            chains[c] = r.chains[c].draws + p;
        tf_diag_summary ds;
        if (tf_diag_summarise(w, chains, nc, KEPT, d, &ds, &err) != TF_OK)
            goto done;
        if (ds.ess_bulk < o->ess_bulk)
            o->worst = p;
        o->ess_bulk = fmin(o->ess_bulk, ds.ess_bulk);
        o->rhat = fmax(o->rhat, ds.rhat);
    }
    o->seconds = now() - t0;
    /* Correlations over the pooled draws, of log theta for positive parameters (all of them
     * here), the scale the walk moves on up to the bounded ones' logit. */
    o->max_corr = 0;
    o->corr_i = o->corr_j = 0;
    for (size_t i = 0; i < d; i++)
        for (size_t j = i + 1; j < d; j++) {
            double si = 0, sj = 0, sii = 0, sjj = 0, sij = 0, n = (double)(nc * KEPT);
            for (size_t c = 0; c < nc; c++)
                for (size_t k = 0; k < KEPT; k++) {
                    double a = log(r.chains[c].draws[k * d + i]), b = log(r.chains[c].draws[k * d + j]);
                    si += a;
                    sj += b;
                    sii += a * a;
                    sjj += b * b;
                    sij += a * b;
                }
            double cov = sij / n - si / n * sj / n, vi = sii / n - si / n * si / n, vj = sjj / n - sj / n * sj / n;
            double rho = cov / sqrt(vi * vj);
            if (fabs(rho) > fabs(o->max_corr)) {
                o->max_corr = rho;
                o->corr_i = i;
                o->corr_j = j;
            }
        }
    o->acceptance = 0;
    for (size_t c = 0; c < nc; c++)
        o->acceptance += r.chains[c].acceptance / (double)nc;
    ok = 1;
done:
    if (!ok)
        fprintf(stderr, "bench_fit: the exact-likelihood run failed\n");
    tf_diag_workspace_free(w);
    if (r.chains)
        for (size_t c = 0; c < nc; c++) {
            tf_chain_free(r.chains[c].chain);
            tf_screen_free(r.chains[c].sc);
            free(r.chains[c].pilot_z);
            free(r.chains[c].pilot_lt);
            free(r.chains[c].draws);
        }
    free(r.chains);
    free(r.plausible);
    free(zs);
    return ok;
}

/* PMMH (standard, as analyze runs it) and the exact sampler on a 30-year survey, Gompertz +
 * log-normal, for each seed; prints both and the geometric mean of PMMH / exact. */
static int compare_exact(void)
{
    const char *file = "surveys/heron-colony.csv";
    bench_setup b;
    int ok = bench_setup_open(&b, file, NULL, "gompertz", "lognormal", "bench_fit");
    const tf_series *s = b.s;
    const tf_posterior *post = b.post;
    tf_pmmh_options d = fixed_options();
    if (ok)
        printf("\nbench_fit: PMMH against Metropolis-Hastings with the exact (Kalman) likelihood, %s "
               "(%zu years) gompertz+lognormal,\n  same priors, %zu chains x %zu kept (thin %zu) after %zu "
               "warm-up, same adaptation, 2 threads each\n",
               strrchr(file, '/') + 1, tf_series_n_years(s), d.n_chains, (size_t)KEPT, d.thin, d.n_warmup);
    if (ok)
        printf("%-8s %4s %6s %5s %7s %8s %6s %6s %9s\n", "sampler", "seed", "N", "sd", "time_s", "ess_bulk", "rhat",
               "accept", "ess/s");
    /* Before / after each lever, in the same run: the fixed-length standard kernel, the same with
     * delayed acceptance, and the default run by need. */
    static const int versions[] = {V_STANDARD, V_DELAYED, V_BY_NEED};
    enum { N_VERSIONS = sizeof versions / sizeof versions[0] };
    double log_ratio[N_VERSIONS] = {0}, log_ess_ratio[N_VERSIONS] = {0}, sum_pmmh[N_VERSIONS] = {0}, sum_exact = 0;
    for (uint64_t seed = 1; ok && seed <= N_SEEDS; seed++) {
        outcome ex;
        if (!(ok = run_exact(post, s, 0, seed, &ex)))
            break;
        printf("%-8s %4llu %6s %5.2f %7.2f %8.0f %6.3f %6.3f %9.1f\n", "exact", (unsigned long long)seed, "-", 0.0,
               ex.seconds, ex.ess_bulk, ex.rhat, ex.acceptance, ex.ess_bulk / ex.seconds);
        sum_exact += ex.ess_bulk / ex.seconds;
        for (int v = 0; ok && v < N_VERSIONS; v++) {
            outcome pm;
            if (!(ok = run_one(post, s, versions[v], seed, &pm)))
                break;
            printf("%-8s %4llu %6zu %5.2f %7.2f %8.0f %6.3f %6.3f %9.1f\n", variant_name[versions[v]],
                   (unsigned long long)seed, pm.n_particles, pm.loglik_sd, pm.seconds, pm.ess_bulk, pm.rhat,
                   pm.acceptance, pm.ess_bulk / pm.seconds);
            log_ratio[v] += log((pm.ess_bulk / pm.seconds) / (ex.ess_bulk / ex.seconds));
            log_ess_ratio[v] += log(pm.ess_bulk / ex.ess_bulk);
            sum_pmmh[v] += pm.ess_bulk / pm.seconds;
        }
        fflush(stdout);
    }
    for (int v = 0; ok && v < N_VERSIONS; v++) {
        double ratio = exp(log_ratio[v] / N_SEEDS), ess_ratio = exp(log_ess_ratio[v] / N_SEEDS);
        printf("bench_fit: ESS per second, exact %.1f, PMMH %s %.1f (means over %d seeds); PMMH / exact: "
               "geometric mean %.4f (1/%.0f); ESS ratio %.2f\n",
               sum_exact / N_SEEDS, variant_name[versions[v]], sum_pmmh[v] / N_SEEDS, N_SEEDS, ratio, 1.0 / ratio,
               ess_ratio);
    }
    if (ok)
        printf("bench_fit: meaning: the ratio is the share of the effective samples per second that exact-likelihood "
               "sampling would give, the price of estimating the likelihood by a particle filter where no closed "
               "form exists. The fixed-length rows run %zu iterations per chain; by-need runs stop once the checks "
               "pass, so its ESS is near 400 and its ratio is that of the whole fit, warm-up included, as a user "
               "waits for it\n",
               (size_t)KEPT * THIN);
    bench_setup_close(&b);
    return ok;
}

/* How well the random walk mixes where the posterior is awkward, apart from the particle filter's
 * noise: ESS per iteration of Metropolis-Hastings with a deterministic likelihood (the Kalman
 * filter's for gompertz+lognormal, where it is exact; the extended Kalman filter of screen.h
 * elsewhere, a stand-in with nearly the same shape), with PMMH's schedule and adaptation, per
 * default candidate on the demo surveys. The yardstick is adaptive random-walk Metropolis on a
 * Gaussian of the same dimension d: about 0.3 / d (Gelman, Roberts & Gilks 1996, Bayesian
 * Statistics 5:599, the efficiency of the optimally scaled walk; recalled from memory). A
 * ratio far below 1 points at a funnel, a ridge or heavy tails that the walk crosses slowly. */
static const bench_case walk_cases[] = {
    {"surveys/heron-colony.csv", NULL, "gompertz", "lognormal"},
    {"surveys/heron-colony.csv", NULL, "exponential", "poisson"},
    {"surveys/heron-colony.csv", NULL, "ricker", "poisson"},
    {"surveys/heron-colony.csv", NULL, "gompertz", "poisson"},
    {"surveys/heron-colony.csv", NULL, "ricker", "negbin"},
    {"surveys/squirrel-transect.csv", NULL, "ricker", "poisson"},
    {"surveys/squirrel-transect.csv", NULL, "gompertz", "poisson"},
    {"surveys/three-herds.csv", "north-valley", "ricker", "poisson"},
    {"surveys/three-herds.csv", "north-valley", "gompertz", "negbin"},
};
#define N_WALK (sizeof walk_cases / sizeof walk_cases[0])

static int walk_efficiency(void)
{
    printf("\nbench_fit: ESS per iteration of the walk with a deterministic likelihood (Kalman where exact, else "
           "the screen's extended Kalman filter), %d chains x %d iterations, against 0.3/d\n",
           4, KEPT * THIN);
    printf("%-44s %3s %10s %10s %8s %6s %8s %s\n", "case", "d", "ess/iter", "0.3/d", "ratio", "accept", "worst",
           "largest correlation (of logs)");
    int ok = 1;
    for (size_t k = 0; ok && k < N_WALK; k++) {
        const bench_case *c = &walk_cases[k];
        bench_setup b;
        ok = bench_setup_open(&b, c->file, c->population, c->growth, c->obs, "bench_fit");
        const tf_series *s = b.s;
        const tf_posterior *post = b.post;
        const tf_model *m = b.m;
        int exact = !strcmp(c->growth, "gompertz") && !strcmp(c->obs, "lognormal");
        outcome o;
        if (ok && (ok = run_exact(post, s, !exact, 1, &o))) {
            size_t d = tf_posterior_dim(post);
            double per_iter = o.ess_bulk / (4.0 * KEPT * THIN), ref = 0.3 / (double)d;
            char name[128];
            snprintf(name, sizeof name, "%s%s%s %s+%s%s", strrchr(c->file, '/') + 1, c->population ? ":" : "",
                     c->population ? c->population : "", c->growth, c->obs, exact ? " (Kalman)" : "");
            printf("%-44s %3zu %10.4f %10.4f %8.2f %6.3f %8s %s-%s %+.2f\n", name, d, per_iter, ref, per_iter / ref,
                   o.acceptance, tf_model_param_name(m, o.worst), tf_model_param_name(m, o.corr_i),
                   tf_model_param_name(m, o.corr_j), o.max_corr);
            fflush(stdout);
        }
        bench_setup_close(&b);
    }
    return ok;
}

int main(void)
{
    /* The default model files sit in models/ of the repository root. */
    setenv("TALLYFIT_MODELS", "models", 0);
    /* BENCH_FIT_WALK=1 runs only the walk's efficiency (the last part), for work on the walk. */
    if (getenv("BENCH_FIT_WALK"))
        return walk_efficiency() ? 0 : 1;
    tf_pmmh_options d = fixed_options();
    printf("bench_fit: %zu chains x %zu iterations (every %zu-th kept) after %zu warm-up, 2 threads, rho %.2f\n",
           d.n_chains, d.max_iter, d.thin, d.n_warmup, d.rho);
    printf("%-40s %-10s %4s %6s %5s %7s %8s %8s %6s %8s\n", "case", "method", "seed", "N", "sd", "time_s",
           "ess_bulk", "ess_tail", "rhat", "ess/s");
    double log_ratio_sum = 0, log_da_sum = 0;
    size_t n_ratio = 0;
    int ok = 1;
    for (size_t k = 0; k < N_CASES; k++) {
        const bench_case *c = &cases[k];
        bench_setup b;
        if (!bench_setup_open(&b, c->file, c->population, c->growth, c->obs, "bench_fit"))
            ok = 0;
        const tf_series *s = b.s;
        const tf_posterior *post = b.post;
        char name[128];
        snprintf(name, sizeof name, "%s%s%s %s+%s", strrchr(c->file, '/') + 1, c->population ? ":" : "",
                 c->population ? c->population : "", c->growth, c->obs);
        double case_da = 0;
        for (uint64_t seed = 1; ok && seed <= N_SEEDS; seed++) {
            outcome o[3];
            for (int method = 0; method < 3 && ok; method++) {
                ok = run_one(post, s, method, seed, &o[method]);
                if (ok)
                    printf("%-40s %-10s %4llu %6zu %5.2f %7.2f %8.0f %8.0f %6.3f %8.1f\n", name,
                           variant_name[method], (unsigned long long)seed, o[method].n_particles,
                           o[method].loglik_sd, o[method].seconds, o[method].ess_bulk, o[method].ess_tail,
                           o[method].rhat, o[method].ess_bulk / o[method].seconds);
            }
            if (ok) {
                log_ratio_sum += log((o[1].ess_bulk / o[1].seconds) / (o[0].ess_bulk / o[0].seconds));
                double da = log((o[2].ess_bulk / o[2].seconds) / (o[0].ess_bulk / o[0].seconds));
                log_da_sum += da;
                case_da += da / N_SEEDS;
                n_ratio++;
            }
        }
        if (ok)
            printf("%-40s delayed acceptance / standard, ESS per second: %.2f\n", name, exp(case_da));
        bench_setup_close(&b);
        fflush(stdout);
    }
    if (!ok)
        return 1;
    printf("bench_fit: ESS per second, correlated / standard: geometric mean %.2f over %zu runs\n",
           exp(log_ratio_sum / (double)n_ratio), n_ratio);
    printf("bench_fit: ESS per second, delayed acceptance / standard: geometric mean %.2f over %zu runs\n",
           exp(log_da_sum / (double)n_ratio), n_ratio);
    fflush(stdout);
    return compare_exact() && walk_efficiency() ? 0 : 1;
}
