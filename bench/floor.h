/* The floor of a particle-filter step, shared by the benchmarks that scale by it (bench_filter,
 * bench_analyze): what any bootstrap filter step must do, written by hand for the linear (Gompertz)
 * drift with Poisson counts in the structure-of-arrays form of src/filter/filter.c (vector exp
 * through model/vector_math.h, independent accumulators, branch-free systematic resampling,
 * Kitagawa 1996). One copy, so that both benchmarks time the same loop: they once had two, and a
 * textbook copy in bench_analyze ran at 19.9 ns where this one ran at 11.0 ns in the same run. */
#ifndef TF_BENCH_FLOOR_H
#define TF_BENCH_FLOOR_H

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "model/vector_math.h"
#include "util/rng.h"

/* The floor: Gompertz drift a + c x, Poisson counts, effort 1. Returns the log-likelihood so the
 * work cannot be optimised away. */
typedef struct {
    size_t n;
    double *x, *xr, *lw, *w;
    uint32_t *pos, *anc;
} floor_ws;

/* A workspace for n particles: 1 when every buffer was had (free with floor_ws_free either way). */
static inline int floor_ws_alloc(floor_ws *ws, size_t n)
{
    *ws = (floor_ws){n, malloc(n * sizeof(double)), malloc(n * sizeof(double)), malloc(n * sizeof(double)),
                     malloc(n * sizeof(double)), malloc((n + 1) * sizeof(uint32_t)), malloc(n * sizeof(uint32_t))};
    return ws->x && ws->xr && ws->lw && ws->w && ws->pos && ws->anc;
}

static inline void floor_ws_free(floor_ws *ws)
{
    free(ws->x);
    free(ws->xr);
    free(ws->lw);
    free(ws->w);
    free(ws->pos);
    free(ws->anc);
}

/* Not inlined: with the particle count a constant of the caller gcc 12 misjudged the tail loops
 * (a false -Waggressive-loop-optimizations), and one call per run costs nothing here. */
__attribute__((noinline, noclone)) static double floor_loglik(floor_ws *ws, const double *y, size_t n_years, double a, double c, double sigma,
                           double x1_mean, double x1_sd, uint64_t *s)
{
    const size_t n = ws->n;
    double *restrict x = ws->x, *restrict xr = ws->xr, *restrict lw = ws->lw, *restrict w = ws->w;
    uint32_t *restrict pos = ws->pos, *restrict anc = ws->anc;
    uint64_t st[4];
    memcpy(st, s, sizeof st);
    for (size_t i = 0; i < n; i++)
        x[i] = x1_mean + x1_sd * tf_rng_normal_s(st);
    double ll = 0;
    for (size_t t = 0; t < n_years; t++) {
        const double yt = y[t];
        for (size_t i = 0; i < n; i++)
            lw[i] = yt * x[i] - exp(x[i]);
        /* Eight independent maxima: one chain would wait on each comparison. */
        double m8[8], mx = -INFINITY;
        for (int k = 0; k < 8; k++)
            m8[k] = -INFINITY;
        size_t i = 0;
        for (; i + 8 <= n; i += 8)
            for (int k = 0; k < 8; k++)
                m8[k] = lw[i + k] > m8[k] ? lw[i + k] : m8[k];
        for (; i < n; i++)
            mx = lw[i] > mx ? lw[i] : mx;
        for (int k = 0; k < 8; k++)
            mx = m8[k] > mx ? m8[k] : mx;
        for (i = 0; i < n; i++) {
            double d = lw[i] - mx;
            double e = exp(d > -500.0 ? d : -500.0);
            w[i] = d > -500.0 ? e : 0.0;
        }
        double acc[8] = {0}, sum = 0;
        for (i = 0; i + 8 <= n; i += 8)
            for (int k = 0; k < 8; k++)
                acc[k] += w[i + k];
        for (; i < n; i++)
            sum += w[i];
        for (int k = 0; k < 8; k++)
            sum += acc[k];
        ll += mx + log(sum / (double)n);
        if (t + 1 == n_years)
            break;
        const double scale = (double)n / sum, u = tf_rng_uniform_s(st);
        memset(pos, 0, n * sizeof *pos);
        int64_t prev = 0;
        double cum = 0;
        for (size_t j = 0; j < n; j++) {
            cum += w[j];
            int64_t k = (int64_t)(cum * scale + u);
            k = k < (int64_t)n ? k : (int64_t)n;
            pos[k > prev ? prev : (int64_t)n] = (uint32_t)j;
            prev = k;
        }
        uint32_t b = 0;
        for (size_t j = 0; j < n; j++) {
            b = pos[j] > b ? pos[j] : b;
            anc[j] = b;
        }
        for (size_t j = 0; j < n; j++)
            xr[j] = x[anc[j]];
        for (size_t j = 0; j < n; j++)
            x[j] = a + c * xr[j] + sigma * tf_rng_normal_s(st);
    }
    memcpy(s, st, sizeof st);
    return ll;
}

#endif
