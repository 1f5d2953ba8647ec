/* What the correlated pseudo-marginal method (Deligiannidis, Doucet & Pitt 2018) buys over the
 * standard one on the demo surveys: effective samples per second of wall-clock time, the
 * smallest bulk ESS over the parameters divided by the run's time, each method with its own
 * tuned particle count, same chains, iterations and seeds. The summary line gives the geometric
 * mean over cases and seeds of the ratio correlated / standard: above 1 the correlated method
 * wins. Runs from the repository root (make bench). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "cmd/setup.h"
#include "model/model.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "sampler/posterior.h"
#include "survey/survey.h"

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

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

typedef struct {
    double seconds, ess_bulk, ess_tail, rhat, loglik_sd;
    size_t n_particles;
} outcome;

static int run_one(const tf_posterior *post, const tf_series *s, int correlated, uint64_t seed, outcome *o)
{
    tf_pmmh_options opt = tf_pmmh_default_options();
    opt.correlated = correlated;
    opt.seed = seed;
    opt.n_threads = 2;
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
    o->loglik_sd = tf_fit_settings_of(fit)->loglik_sd;
    o->n_particles = tf_fit_settings_of(fit)->n_particles;
    tf_fit_free(fit);
    return 1;
}

int main(void)
{
    /* The default model files sit in models/ of the repository root. */
    setenv("TALLYFIT_MODELS", "models", 0);
    tf_pmmh_options d = tf_pmmh_default_options();
    printf("bench_fit: %zu chains x %zu iterations (every %zu-th kept) after %zu warm-up, 2 threads, rho %.2f\n",
           d.n_chains, d.n_iter * d.thin, d.thin, d.n_warmup, d.rho);
    printf("%-40s %-10s %4s %6s %5s %7s %8s %8s %6s %8s\n", "case", "method", "seed", "N", "sd", "time_s",
           "ess_bulk", "ess_tail", "rhat", "ess/s");
    double log_ratio_sum = 0;
    size_t n_ratio = 0;
    int ok = 1;
    for (size_t k = 0; k < N_CASES; k++) {
        const bench_case *c = &cases[k];
        tf_error err;
        tf_error_init(&err);
        tf_survey *sv = NULL;
        tf_model *m = NULL;
        tf_prior_set *priors = NULL;
        tf_posterior *post = NULL;
        const tf_series *s = NULL;
        if (tf_survey_read(c->file, &sv, &err) != TF_OK ||
            !(s = c->population ? tf_survey_find(sv, c->population) : tf_survey_series(sv, 0)) ||
            tf_model_new(c->growth, c->obs, &m, &err) != TF_OK ||
            tf_model_initial_from_series(m, s, &err) != TF_OK ||
            tf_setup_priors(m, s, NULL, &priors, &err) != TF_OK ||
            tf_posterior_new(m, priors, &post, &err) != TF_OK) {
            tf_error_print(&err, "bench_fit", stderr);
            ok = 0;
        }
        char name[128];
        snprintf(name, sizeof name, "%s%s%s %s+%s", strrchr(c->file, '/') + 1, c->population ? ":" : "",
                 c->population ? c->population : "", c->growth, c->obs);
        for (uint64_t seed = 1; ok && seed <= N_SEEDS; seed++) {
            outcome o[2];
            for (int method = 0; method < 2 && ok; method++) {
                ok = run_one(post, s, method, seed, &o[method]);
                if (ok)
                    printf("%-40s %-10s %4llu %6zu %5.2f %7.2f %8.0f %8.0f %6.3f %8.1f\n", name,
                           method ? "correlated" : "standard", (unsigned long long)seed, o[method].n_particles,
                           o[method].loglik_sd, o[method].seconds, o[method].ess_bulk, o[method].ess_tail,
                           o[method].rhat, o[method].ess_bulk / o[method].seconds);
            }
            if (ok) {
                log_ratio_sum += log((o[1].ess_bulk / o[1].seconds) / (o[0].ess_bulk / o[0].seconds));
                n_ratio++;
            }
        }
        tf_posterior_free(post);
        tf_prior_set_free(priors);
        tf_model_free(m);
        tf_survey_free(sv);
        fflush(stdout);
    }
    if (!ok)
        return 1;
    printf("bench_fit: ESS per second, correlated / standard: geometric mean %.2f over %zu runs\n",
           exp(log_ratio_sum / (double)n_ratio), n_ratio);
    return 0;
}
