/* Cost of a projection per run and year: 20000 futures of the exponential model for 50 years with
 * three thresholds, from one fixed draw and from 4000 distinct draws (one drift call per draw and
 * year). Best of several repetitions; the machine is shared, so single figures move. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "project/project.h"

static const char *const names[] = {"r"};
static const double lower[] = {-INFINITY}, upper[] = {INFINITY};
static void drift(const double *p, const double *x, double *out, size_t n)
{
    for (size_t i = 0; i < n; i++)
        out[i] = x[i] + p[0];
}
static const tf_growth_type growth = {"exp", "Exponential", 1, names, lower, upper, drift};

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int bench(const char *what, size_t n_draws)
{
    enum { RUNS = 20000, YEARS = 50, REPS = 7 };
    double *theta = malloc(2 * n_draws * sizeof *theta), *x0 = malloc(n_draws * sizeof *x0);
    if (!theta || !x0)
        return 1;
    for (size_t d = 0; d < n_draws; d++) {
        theta[2 * d] = -0.02 + 0.01 * (double)(d % 5) / 5;
        theta[2 * d + 1] = 0.15;
        x0[d] = log(300);
    }
    tf_project_input in = {&growth, 1, 2, n_draws, theta, x0, 1};
    tf_project_options o;
    tf_project_options_init(&o);
    o.n_runs = RUNS;
    o.horizon = YEARS;
    tf_error err;
    tf_error_init(&err);
    if (tf_project_parse_thresholds("50,100,20%", o.thresholds, TF_PROJECT_MAX_THRESHOLDS, &o.n_thresholds, &err))
        return 1;
    double best = INFINITY;
    for (int rep = 0; rep < REPS; rep++) {
        tf_rng rng;
        uint64_t key = (uint64_t)rep;
        tf_rng_derive(&rng, 1, &key, 1);
        tf_projection *p = NULL;
        double t0 = now();
        if (tf_project_run(&in, 1, &o, &rng, &p, &err)) {
            tf_error_print(&err, "bench_project", stderr);
            return 1;
        }
        double dt = now() - t0;
        best = dt < best ? dt : best;
        tf_projection_free(p);
    }
    printf("projection, %-18s %6.1f ns per run-year (%.1f ms for %d runs x %d years)\n", what,
           1e9 * best / (RUNS * (double)YEARS), 1e3 * best, RUNS, YEARS);
    free(theta);
    free(x0);
    return 0;
}

int main(void)
{
    return bench("one draw:", 1) || bench("4000 draws:", 4000);
}
