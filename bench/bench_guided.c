/* What the guided particle filter buys over the bootstrap filter: for each demo population with
 * the model pairs analyze fits most, and for simulated 30-year Gompertz series with counts near 10,
 * 100, 1000 and 10000 under each counting error, the particle count at which the log-likelihood
 * estimate's SD is 1 at the posterior mean (measured at a reference count, then N (sd / 1)^2: the
 * SD falls like 1/sqrt(N), Berard, Del Moral & Doucet 2014), for each proposal, their ratio, the
 * time per particle-step of each during that measurement, and, for one pair per series, the wall
 * time of one default fit (tf_pmmh_run with the fit command's defaults, 2 threads) with each.
 * The posterior mean comes from a short guided fit. Targets: at least 10x fewer particles for
 * Poisson counts of 100 and more, at least 3x for negative-binomial and log-normal counts.
 * Runs from the repository root (make bench). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "filter/filter.h"
#include "model/model.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "sampler/posterior.h"
#include "survey/survey.h"

#include "setup.h"

#define REPS 60
#define N_YEARS 30

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* SD of the log-likelihood estimate over REPS runs at n particles, and ns per particle-step. */
static void spread(const tf_model *m, const tf_series *s, const double *theta, size_t n, tf_proposal p, double *sd,
                   double *ns)
{
    tf_filter *f = tf_filter_alloc(m, s, n);
    if (!f) {
        *sd = *ns = NAN;
        return;
    }
    tf_filter_set_proposal(f, p);
    tf_rng rng;
    uint64_t key = (uint64_t)p;
    tf_rng_derive(&rng, 17, &key, 1);
    double s1 = 0, s2 = 0, t0 = now();
    for (int r = 0; r < REPS; r++) {
        double l = tf_filter_loglik(f, theta, &rng, NULL);
        s1 += l;
        s2 += l * l;
    }
    *ns = 1e9 * (now() - t0) / ((double)REPS * (double)n * (double)tf_series_n_years(s));
    *sd = isfinite(s1) ? sqrt(fmax(s2 - s1 * s1 / REPS, 0) / (REPS - 1)) : INFINITY;
    tf_filter_free(f);
}

/* The count at which the SD is 1, from a measurement at a reference count that gives an SD
 * between about 0.3 and 3 (raised fourfold while the estimate is not finite or too noisy to
 * extrapolate from, at most 4 times). */
static double particles_for_sd1(const tf_model *m, const tf_series *s, const double *theta, tf_proposal p,
                                double *ns)
{
    size_t n = p == TF_PROPOSAL_GUIDED ? 50 : 500;
    double sd = INFINITY;
    for (int k = 0; k < 5; k++) {
        spread(m, s, theta, n, p, &sd, ns);
        if (sd < 3)
            break;
        n *= 4;
    }
    return isfinite(sd) ? (double)n * sd * sd : INFINITY;
}

static int fit_once(const tf_posterior *post, const tf_series *s, tf_proposal p, int short_run, double *mean,
                    double *seconds, size_t *n_particles)
{
    tf_pmmh_options opt = tf_pmmh_default_options();
    opt.proposal = p;
    opt.n_threads = 2;
    if (short_run) {
        opt.min_iter = opt.max_iter = 4000;   /* a fixed length: 500 draws kept every 8th */
        opt.thin = 8;
        opt.n_warmup = 2000;
    }
    tf_error err;
    tf_error_init(&err);
    tf_fit *fit = NULL;
    double t0 = now();
    if (tf_pmmh_run(post, s, &opt, NULL, NULL, NULL, &fit, &err) != TF_OK) {
        tf_error_print(&err, "bench_guided", stderr);
        return 0;
    }
    *seconds = now() - t0;
    *n_particles = tf_fit_settings_of(fit)->n_particles;
    size_t d = tf_model_n_params(tf_posterior_model(post)), nd = tf_fit_n_draws(fit);
    const double *dr = tf_fit_draws(fit);
    for (size_t j = 0; j < d; j++) {
        double acc = 0;
        for (size_t i = 0; i < nd; i++)
            acc += dr[i * d + j];
        mean[j] = acc / (double)nd;
    }
    tf_fit_free(fit);
    return 1;
}

/* One row: a series and a model pair. with_fit: also time one default fit per proposal. */
static int row(const char *name, const tf_series *s, const char *growth, const char *obs, int with_fit,
               double *log_ratio_sum, int *n_ratio)
{
    bench_setup b = {0};
    int ok = bench_setup_series(&b, s, growth, obs, "bench_guided");
    const tf_model *m = b.m;
    const tf_posterior *post = b.post;
    double theta[TF_MAX_PARAMS], secs;
    size_t np;
    ok = ok && fit_once(post, s, TF_PROPOSAL_GUIDED, 1, theta, &secs, &np);
    if (ok) {
        double ns_g, ns_b;
        double ng = particles_for_sd1(m, s, theta, TF_PROPOSAL_GUIDED, &ns_g);
        double nb = particles_for_sd1(m, s, theta, TF_PROPOSAL_BOOTSTRAP, &ns_b);
        printf("%-28s %-22s %10.1f %10.1f %8.1f %7.1f %7.1f", name, tf_model_name(m), nb, ng, nb / ng, ns_b, ns_g);
        if (isfinite(nb / ng)) {
            *log_ratio_sum += log(nb / ng);
            *n_ratio += 1;
        }
        if (with_fit) {
            double mean[TF_MAX_PARAMS], sb, sg;
            size_t pb, pg;
            if (fit_once(post, s, TF_PROPOSAL_BOOTSTRAP, 0, mean, &sb, &pb) &&
                fit_once(post, s, TF_PROPOSAL_GUIDED, 0, mean, &sg, &pg))
                printf(" %8.1f %8.1f %7.1f  (N %zu / %zu)", sb, sg, sb / sg, pb, pg);
        }
        printf("\n");
        fflush(stdout);
    }
    bench_setup_close(&b);
    return ok;
}

int main(void)
{
    /* The model files of the checkout (the benchmark runs from the repository root). */
    setenv("TALLYFIT_MODELS", "models", 0);
    printf("bench_guided: particles for a log-likelihood SD of 1 at the posterior mean, bootstrap vs guided;\n"
           "  ns per particle-step of each; wall seconds of one default fit with each (2 threads)\n");
    printf("%-28s %-22s %10s %10s %8s %7s %7s %8s %8s %7s\n", "series", "model", "N boot", "N guided", "ratio",
           "ns boot", "ns gd", "fit boot", "fit gd", "ratio");
    static const struct {
        const char *file, *population;
    } demo[] = {
        {"surveys/heron-colony.csv", NULL},
        {"surveys/squirrel-transect.csv", NULL},
        {"surveys/three-herds.csv", "north-valley"},
        {"surveys/three-herds.csv", "river-flats"},
        {"surveys/three-herds.csv", "high-plateau"},
    };
    static const char *const pairs[][2] = {
        {"gompertz", "poisson"}, {"ricker", "negbin"}, {"exponential", "lognormal-int"}};
    double lr = 0;
    int nr = 0, ok = 1;
    for (size_t k = 0; k < sizeof demo / sizeof demo[0]; k++) {
        tf_error err;
        tf_error_init(&err);
        tf_survey *sv = NULL;
        if (tf_survey_read(demo[k].file, &sv, &err) != TF_OK) {
            tf_error_print(&err, "bench_guided", stderr);
            return 1;
        }
        const tf_series *s = demo[k].population ? tf_survey_find(sv, demo[k].population) : tf_survey_series(sv, 0);
        char name[64];
        snprintf(name, sizeof name, "%s%s%s", strrchr(demo[k].file, '/') + 1, demo[k].population ? ":" : "",
                 demo[k].population ? demo[k].population : "");
        for (size_t p = 0; p < sizeof pairs / sizeof pairs[0]; p++)
            ok &= row(name, s, pairs[p][0], pairs[p][1], p == 0, &lr, &nr);
        tf_survey_free(sv);
    }
    /* Simulated: Gompertz near K, 30 years, sigma 0.1; the counting error's own parameter at a
     * moderate value (phi 20, tau 0.1). */
    static const double levels[] = {10, 100, 1000, 10000};
    static const char *const obs[] = {"poisson", "negbin", "lognormal"};
    for (size_t k = 0; k < sizeof levels / sizeof levels[0]; k++)
        for (size_t o = 0; o < sizeof obs / sizeof obs[0]; o++) {
            tf_error err;
            tf_error_init(&err);
            tf_model *m = NULL;
            if (tf_model_new("gompertz", obs[o], &m, &err) != TF_OK)
                return 1;
            const double theta[] = {0.3, levels[k], 0.1, o == 1 ? 20.0 : 0.1};
            double x[N_YEARS], y[N_YEARS];
            tf_rng rng;
            uint64_t key = 100 + k;
            tf_rng_derive(&rng, 5, &key, 1);
            tf_series *s = NULL;
            if (tf_model_simulate(m, theta, log(levels[k]), NULL, N_YEARS, &rng, x, y, &err) == TF_OK)
                s = tf_series_new("sim", 2000, N_YEARS, y, NULL, NULL, &err);
            tf_model_free(m);
            if (!s) {
                tf_error_print(&err, "bench_guided", stderr);
                return 1;
            }
            char name[64];
            snprintf(name, sizeof name, "simulated, counts ~%g", levels[k]);
            ok &= row(name, s, "gompertz", obs[o], o == 0, &lr, &nr);
            tf_series_free(s);
        }
    if (nr)
        printf("bench_guided: geometric mean of the particle ratio bootstrap / guided over %d rows: %.1f\n", nr,
               exp(lr / nr));
    return ok ? 0 : 1;
}
