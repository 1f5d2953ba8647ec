/* Particle-filter speed: particle-steps per second of tf_filter_loglik on a 30-year survey with
 * counts in the thousands, for 100, 1000 and 10000 particles, against a floor loop measured in
 * the same run. The floor does only what any bootstrap filter step must: one normal draw, the
 * observation term (Poisson, with its exp), one exp for the weight, the max and sum, and
 * branch-free systematic resampling, written by hand for the linear (Gompertz) drift. The ratio
 * bootstrap filter / floor is the price of the model table and the general code; guided /
 * bootstrap the price per particle-step of looking at the count (the look-ahead weight, the
 * guided move and its weight terms), which the guided filter repays many times over in particles
 * (bench_guided). The last column is the guided filter on the same counts with removals every year
 * (the take and the extinction-holding drift of model.h), against the guided filter without.
 * Repetitions of all variants are interleaved and the best of each is kept, since
 * the machine is shared. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "filter/filter.h"
#include "model/model.h"
#include "survey/series.h"
#include "util/rng.h"

#include "floor.h"

#define N_YEARS 30
#define N_REPS 7
#define N_VARIANTS 7
/* Particle-steps per timed measurement: about 0.1 s at the speeds this machine reaches. */
#define STEPS_PER_MEASURE 1e7

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void die(const char *what)
{
    fprintf(stderr, "bench_filter: %s\n", what);
    exit(1);
}

int main(void)
{
    static const size_t sizes[] = {100, 1000, 10000};
    enum { N_SIZES = 3 };
    tf_error err;
    tf_error_init(&err);

    /* A Gompertz population near K = 4000 (counts in the thousands), Poisson counting error. */
    tf_model *gp = NULL, *rn = NULL;
    if (tf_model_new("gompertz", "poisson", &gp, &err) || tf_model_new("ricker", "negbin", &rn, &err))
        die("cannot build the models");
    const double theta_gp[] = {0.4, 4000.0, 0.08};
    const double theta_rn[] = {0.6, 4000.0, 0.08, 40.0};
    tf_rng rng;
    uint64_t key = 1;
    tf_rng_derive(&rng, 2024, &key, 1);
    double xs[N_YEARS], y[N_YEARS];
    if (tf_model_simulate(gp, theta_gp, log(3000.0), NULL, N_YEARS, &rng, xs, y, &err))
        die("cannot simulate the series");
    tf_series *s = tf_series_new("bench", 2000, N_YEARS, y, NULL, NULL, &err);
    if (!s)
        die("cannot build the series");
    /* The same counts with 150 animals removed after each (about 4 % of the population). */
    tf_series *sh = tf_series_new("bench-harvested", 2000, N_YEARS, y, NULL, NULL, &err);
    double removed[N_YEARS];
    for (size_t t = 0; t < N_YEARS; t++)
        removed[t] = 150.0;
    if (!sh || tf_series_set_actions(sh, removed, NULL, &err))
        die("cannot build the harvested series");
    tf_model_set_initial(gp, log(y[0]), 0.5);
    tf_model_set_initial(rn, log(y[0]), 0.5);
    const double a = theta_gp[0], c = 1 - theta_gp[0] / log(theta_gp[1]);

    double best[N_SIZES][N_VARIANTS];
    for (int k = 0; k < N_SIZES; k++)
        for (int v = 0; v < N_VARIANTS; v++)
            best[k][v] = INFINITY;
    double sink = 0;
    for (int rep = 0; rep < N_REPS; rep++) {
        for (int k = 0; k < N_SIZES; k++) {
            size_t n = sizes[k];
            size_t calls = (size_t)(STEPS_PER_MEASURE / (double)(n * N_YEARS)) + 1;
            tf_filter *fg = tf_filter_alloc(gp, s, n), *fr = tf_filter_alloc(rn, s, n), *fb = tf_filter_alloc(gp, s, n);
            tf_filter *fh = tf_filter_alloc(gp, sh, n);
            tf_filter_set_proposal(fb, TF_PROPOSAL_BOOTSTRAP);
            floor_ws ws;
            int ws_ok = floor_ws_alloc(&ws, n);
            size_t n_move = fg ? tf_filter_n_move(fg) : 0, n_pick = fg ? tf_filter_n_pick(fg) : 0;
            double *zm = malloc(n_move * sizeof *zm), *zp = malloc(n_pick * sizeof *zp);
            double *path = malloc(N_YEARS * sizeof *path);
            if (!fg || !fr || !fb || !fh || !ws_ok || !zm || !zp || !path)
                die("out of memory");
            tf_rng_fill_normal(&rng, zm, n_move);
            tf_rng_fill_normal(&rng, zp, n_pick);
            double t0, dt[N_VARIANTS];
            /* 0: floor, 1: guided gompertz+poisson, 2: guided ricker+negbin, 3: with a path, 4: fixed
             * mode, 5: bootstrap gompertz+poisson, 6: guided with removals. */
            t0 = now();
            for (size_t i = 0; i < calls; i++)
                sink += floor_loglik(&ws, y, N_YEARS, a, c, theta_gp[2], log(y[0]), 0.5, rng.s);
            dt[0] = now() - t0;
            t0 = now();
            for (size_t i = 0; i < calls; i++)
                sink += tf_filter_loglik(fg, theta_gp, &rng, NULL);
            dt[1] = now() - t0;
            t0 = now();
            for (size_t i = 0; i < calls; i++)
                sink += tf_filter_loglik(fr, theta_rn, &rng, NULL);
            dt[2] = now() - t0;
            t0 = now();
            for (size_t i = 0; i < calls; i++)
                sink += tf_filter_loglik(fg, theta_gp, &rng, path) + path[0];
            dt[3] = now() - t0;
            t0 = now();
            for (size_t i = 0; i < calls; i++)
                sink += tf_filter_loglik_fixed(fg, theta_gp, zm, zp, NULL);
            dt[4] = now() - t0;
            t0 = now();
            for (size_t i = 0; i < calls; i++)
                sink += tf_filter_loglik(fb, theta_gp, &rng, NULL);
            dt[5] = now() - t0;
            t0 = now();
            for (size_t i = 0; i < calls; i++)
                sink += tf_filter_loglik(fh, theta_gp, &rng, NULL);
            dt[6] = now() - t0;
            for (int v = 0; v < N_VARIANTS; v++) {
                double ns = 1e9 * dt[v] / ((double)calls * (double)n * N_YEARS);
                if (ns < best[k][v])
                    best[k][v] = ns;
            }
            tf_filter_free(fg);
            tf_filter_free(fr);
            tf_filter_free(fb);
            tf_filter_free(fh);
            floor_ws_free(&ws);
            free(zm);
            free(zp);
            free(path);
        }
    }
    printf("particle filter, %d-year survey, best of %d interleaved runs (ns per particle-step; M steps/s)\n",
           N_YEARS, N_REPS);
    printf("gompertz+poisson unless named; ratios: bootstrap / floor, guided / bootstrap, removals / guided\n");
    printf("%8s %16s %18s %8s %18s %8s %18s %18s %18s %18s %8s\n", "N", "floor", "bootstrap", "ratio", "guided",
           "ratio", "guided r+negbin", "guided with path", "guided fixed", "guided removals", "ratio");
    for (int k = 0; k < N_SIZES; k++) {
        printf("%8zu", sizes[k]);
        printf(" %6.2f ns %5.1f M", best[k][0], 1e3 / best[k][0]);
        printf(" %8.2f ns %5.1f M", best[k][5], 1e3 / best[k][5]);
        printf(" %8.2f", best[k][5] / best[k][0]);
        printf(" %8.2f ns %5.1f M", best[k][1], 1e3 / best[k][1]);
        printf(" %8.2f", best[k][1] / best[k][5]);
        for (int v = 2; v < 5; v++)
            printf(" %8.2f ns %5.1f M", best[k][v], 1e3 / best[k][v]);
        printf(" %8.2f ns %5.1f M %8.2f", best[k][6], 1e3 / best[k][6], best[k][6] / best[k][1]);
        printf("\n");
    }
    /* Printed so that the compiler keeps the work; a NaN here would also flag a broken filter. */
    printf("(checksum %.6g)\n", sink);
    tf_series_free(s);
    tf_series_free(sh);
    tf_model_free(gp);
    tf_model_free(rn);
    return 0;
}
