/* Cost of the marginal likelihood by importance sampling squared on the demo surveys: wall-clock
 * seconds of tf_evidence_estimate_fit after one PMMH fit, particles spent per importance draw,
 * the standard error reached, and the precision per second 1 / (se^2 seconds) (higher is
 * better), with 1 and 2 threads. Also the counting-error kernels in ns per particle, the rounded
 * log-normal's midpoint series against its exact distribution-function difference and the
 * continuous log-normal. Runs from the repository root (make bench). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <gsl/gsl_errno.h>

#include "cmd/setup.h"
#include "compare/evidence.h"
#include "model/model.h"
#include "sampler/fit.h"
#include "sampler/pmmh.h"
#include "sampler/posterior.h"
#include "survey/survey.h"

#include "setup.h"

typedef struct {
    const char *file, *population, *growth, *obs;
} bench_case;

static const bench_case cases[] = {
    {"surveys/heron-colony.csv", NULL, "gompertz", "poisson"},
    {"surveys/heron-colony.csv", NULL, "gompertz", "lognormal-int"},
    {"surveys/squirrel-transect.csv", NULL, "ricker", "poisson"},
    {"surveys/three-herds.csv", "river-flats", "theta-logistic", "negbin"},
};
#define N_CASES (sizeof cases / sizeof cases[0])

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void bench_kernels(void)
{
    enum { N = 1000, REPS = 20000 };
    static double x[N], lw[N];
    const struct {
        const char *obs;
        double p, y;
        const char *what;
    } k[] = {
        {"lognormal-int", 0.15, 310, "rounded log-normal, y = 310 (midpoint series)"},
        {"lognormal-int", 0.15, 2, "rounded log-normal, y = 2 (exact difference)"},
        {"lognormal", 0.15, 310, "continuous log-normal"},
        {"poisson", 0, 310, "Poisson"},
    };
    printf("counting-error kernels, %d particles (ns per particle):\n", N);
    for (size_t c = 0; c < sizeof k / sizeof k[0]; c++) {
        const tf_obs_type *o = tf_model_find_obs(k[c].obs);
        double p[1] = {k[c].p}, cst[TF_OBS_MAX_CONST];
        for (int i = 0; i < N; i++)
            x[i] = log(k[c].y) + 0.3 * sin(i);
        o->year_const(p, k[c].y, cst);
        double best = INFINITY;
        for (int r = 0; r < 5; r++) {
            double t0 = now();
            for (int j = 0; j < REPS / 5; j++)
                o->add_logweight(p, k[c].y, 0.0, cst, x, lw, N);
            double t = (now() - t0) / ((double)REPS / 5 * N) * 1e9;
            best = t < best ? t : best;
        }
        printf("  %-48s %7.2f   (checksum %.6g)\n", k[c].what, best, lw[N / 2]);
    }
}

int main(void)
{
    gsl_set_error_handler_off();
    /* Run from the repository root: the model files are in models/ (unless the caller says). */
    setenv("TALLYFIT_MODELS", "models", 0);
    bench_kernels();
    printf("\nmarginal likelihood after a PMMH fit (4 chains x 5000 iterations, thin 4):\n");
    printf("  %-44s %7s %8s %9s %8s %8s %10s\n", "case", "threads", "seconds", "particles", "per draw", "se",
           "1/(se^2 s)");
    int failed = 0;
    for (size_t i = 0; i < N_CASES; i++) {
        const bench_case *bc = &cases[i];
        tf_error err;
        tf_error_init(&err);
        tf_fit *fit = NULL;
        bench_setup b;
        int opened = bench_setup_open(&b, bc->file, bc->population, bc->growth, bc->obs, "bench_evidence");
        const tf_series *s = b.s;
        const tf_posterior *post = b.post;
        const tf_model *m = b.m;
        if (!opened) {
            failed = 1;
            goto next;
        }
        tf_pmmh_options fo = tf_pmmh_default_options();
        fo.min_iter = fo.max_iter = 5000;
        fo.thin = 4;
        fo.n_warmup = 2000;
        fo.n_threads = 2;
        if (tf_pmmh_run(post, s, &fo, NULL, NULL, NULL, &fit, &err) != TF_OK) {
            tf_error_print(&err, "bench_evidence", stderr);
            failed = 1;
            goto next;
        }
        for (size_t threads = 1; threads <= 2; threads++) {
            tf_evidence_options eo = tf_evidence_default_options();
            eo.n_threads = threads;
            tf_evidence ev;
            double t0 = now();
            if (tf_evidence_estimate_fit(post, s, fit, &eo, NULL, &ev, &err) != TF_OK) {
                tf_error_print(&err, "bench_evidence", stderr);
                failed = 1;
                break;
            }
            double t = now() - t0;
            char name[96];
            snprintf(name, sizeof name, "%s %s%s%s", strrchr(bc->file, '/') + 1, bc->population ? bc->population : "",
                     bc->population ? " " : "", tf_model_name(m));
            printf("  %-44s %7zu %8.2f %9zu %8.0f %8.4f %10.0f\n", name, threads, t, ev.n_particles,
                   ev.mean_particles, ev.main.se, 1.0 / (ev.main.se * ev.main.se * t));
        }
    next:
        tf_fit_free(fit);
        bench_setup_close(&b);
    }
    return failed;
}
