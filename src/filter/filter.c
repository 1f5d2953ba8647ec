/* Bootstrap particle filter (Gordon, Salmond & Smith 1993, IEE Proc. F 140:107) for one series:
 * particles are log-abundances kept as plain double arrays, each year is a few passes over them
 * that the compiler vectorises (see the Makefile's HOT_CFLAGS and model/vector_math.h), weights
 * are handled in log space, and resampling is systematic (Kitagawa 1996, J. Comput. Graph. Stat.
 * 5:1, Appendix) in a branch-free form. The likelihood estimate is the product over surveyed
 * years of the mean unnormalised weight, which is unbiased (Del Moral 2004, Feynman-Kac
 * Formulae, Thm 7.4.2); its log is returned. */
#include "filter/filter.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "model/vector_math.h"

/* Weights are exp(lw - max) with lw - max clamped here: exp takes a slow path below about -708
 * (subnormal results), and weights below e^-500 change the sum of N weights by at most
 * N e^-500, far below double precision. Such particles get weight exactly 0. */
#define LOG_WEIGHT_FLOOR (-500.0)

/* Blocks of independent accumulators, so that max and sum reductions vectorise without
 * reassociating a single chain (which -O3 without -ffast-math may not do). */
#define N_ACC 8

struct tf_filter {
    const tf_model *m;
    const tf_series *s;
    size_t n, n_years;
    const double *y;          /* borrowed counts, NAN = not surveyed */
    double *log_effort;       /* n_years */
    double *year_c;           /* n_years * TF_OBS_MAX_CONST: the observation model's year constants */
    double year_c_key[TF_MAX_PARAMS]; /* observation parameters year_c was computed for */
    int year_c_ready;
    double *x[2];             /* states of this year and the next when no path is wanted */
    double *hist;             /* n_years * n states, when a path is wanted */
    uint32_t *anc_hist;       /* n_years * n: parent (in year t) of particle j of year t + 1 */
    unsigned char *resampled; /* n_years: whether year t was followed by resampling */
    double *lw, *w, *xr;      /* n each: log weights, weights, gathered parents */
    uint32_t *anc;            /* n: this year's parents when no path is wanted */
    uint32_t *pos;            /* n + 1: resampling scratch; pos[n] is a sink */
    /* Fixed-random-number mode: radix sort of the states with their indices. */
    uint64_t *key[2];
    uint32_t *perm[2];
    double *w_sorted;
    uint32_t (*digit_count)[256]; /* 8 x 256 */
};

tf_filter *tf_filter_alloc(const tf_model *m, const tf_series *s, size_t n_particles)
{
    size_t n = n_particles, T = tf_series_n_years(s);
    /* Indices are stored as uint32_t; the sink index n must fit as well. */
    if (n == 0 || n >= UINT32_MAX || T == 0 || T > SIZE_MAX / sizeof(double) / n)
        return NULL;
    tf_filter *f = calloc(1, sizeof *f);
    if (!f)
        return NULL;
    f->m = m;
    f->s = s;
    f->n = n;
    f->n_years = T;
    f->y = tf_series_counts(s);
    f->log_effort = malloc(T * sizeof *f->log_effort);
    f->year_c = calloc(T * TF_OBS_MAX_CONST, sizeof *f->year_c);
    f->x[0] = malloc(n * sizeof(double));
    f->x[1] = malloc(n * sizeof(double));
    f->hist = malloc(T * n * sizeof *f->hist);
    f->anc_hist = malloc(T * n * sizeof *f->anc_hist);
    f->resampled = calloc(T, 1);
    f->lw = malloc(n * sizeof *f->lw);
    f->w = malloc(n * sizeof *f->w);
    f->xr = malloc(n * sizeof *f->xr);
    f->anc = malloc(n * sizeof *f->anc);
    f->pos = malloc((n + 1) * sizeof *f->pos);
    f->key[0] = malloc(n * sizeof(uint64_t));
    f->key[1] = malloc(n * sizeof(uint64_t));
    f->perm[0] = malloc(n * sizeof(uint32_t));
    f->perm[1] = malloc(n * sizeof(uint32_t));
    f->w_sorted = malloc(n * sizeof *f->w_sorted);
    f->digit_count = malloc(8 * sizeof *f->digit_count);
    if (!f->log_effort || !f->year_c || !f->x[0] || !f->x[1] || !f->hist || !f->anc_hist || !f->resampled ||
        !f->lw || !f->w || !f->xr || !f->anc || !f->pos || !f->key[0] || !f->key[1] || !f->perm[0] ||
        !f->perm[1] || !f->w_sorted || !f->digit_count)
        goto fail;
    const double *e = tf_series_effort(s);
    for (size_t t = 0; t < T; t++)
        f->log_effort[t] = log(e[t]);
    return f;
fail:
    tf_filter_free(f);
    return NULL;
}

void tf_filter_free(tf_filter *f)
{
    if (!f)
        return;
    free(f->log_effort);
    free(f->year_c);
    free(f->x[0]);
    free(f->x[1]);
    free(f->hist);
    free(f->anc_hist);
    free(f->resampled);
    free(f->lw);
    free(f->w);
    free(f->xr);
    free(f->anc);
    free(f->pos);
    free(f->key[0]);
    free(f->key[1]);
    free(f->perm[0]);
    free(f->perm[1]);
    free(f->w_sorted);
    free(f->digit_count);
    free(f);
}

size_t tf_filter_n_particles(const tf_filter *f) { return f->n; }
size_t tf_filter_n_move(const tf_filter *f) { return f->n_years * f->n; }
size_t tf_filter_n_pick(const tf_filter *f) { return f->n_years; }

/* The observation model's per-year constants depend on its parameters only (ln y!, ln y, ...);
 * they are recomputed when those change, which a sampler moving one block at a time avoids. */
static void update_year_constants(tf_filter *f, const double *p_obs)
{
    const tf_obs_type *o = tf_model_obs(f->m);
    size_t k = o->n_params;
    if (f->year_c_ready && (k == 0 || !memcmp(f->year_c_key, p_obs, k * sizeof *p_obs)))
        return;
    for (size_t t = 0; t < f->n_years; t++)
        if (!isnan(f->y[t]))
            o->year_const(p_obs, f->y[t], f->year_c + t * TF_OBS_MAX_CONST);
    if (k)
        memcpy(f->year_c_key, p_obs, k * sizeof *p_obs);
    f->year_c_ready = 1;
}

/* Largest element ignoring NaN; -inf when all are NaN or -inf. */
static double max_of(const double *v, size_t n)
{
    double acc[N_ACC];
    for (int k = 0; k < N_ACC; k++)
        acc[k] = -INFINITY;
    size_t i = 0;
    for (; i + N_ACC <= n; i += N_ACC)
        for (int k = 0; k < N_ACC; k++)
            acc[k] = v[i + k] > acc[k] ? v[i + k] : acc[k];
    double m = -INFINITY;
    for (; i < n; i++)
        m = v[i] > m ? v[i] : m;
    for (int k = 0; k < N_ACC; k++)
        m = acc[k] > m ? acc[k] : m;
    return m;
}

/* w[i] = exp(lw[i] - mx), exactly 0 below the floor and for NaN; returns the sum. */
static double weights(const double *restrict lw, double *restrict w, size_t n, double mx)
{
    for (size_t i = 0; i < n; i++) {
        double d = lw[i] - mx;
        double e = exp(d > LOG_WEIGHT_FLOOR ? d : LOG_WEIGHT_FLOOR);
        w[i] = d > LOG_WEIGHT_FLOOR ? e : 0.0;
    }
    double acc[N_ACC] = {0};
    size_t i = 0;
    for (; i + N_ACC <= n; i += N_ACC)
        for (int k = 0; k < N_ACC; k++)
            acc[k] += w[i + k];
    double sum = 0.0;
    for (; i < n; i++)
        sum += w[i];
    for (int k = 0; k < N_ACC; k++)
        sum += acc[k];
    return sum;
}

/* Systematic resampling (Kitagawa 1996) of n particles with weights w (sum > 0) and offset
 * u in [0, 1): slot j takes the particle i whose cumulative count n_i = floor(n C_i / sum + u)
 * first exceeds j. Instead of the textbook search (a data-dependent branch per slot), each
 * particle that gains slots writes its index at its first slot, every other particle writes to
 * the sink pos[n], and a running maximum fills the slots in between: the same indices, no
 * branches. Zero-weight particles never gain a slot. anc receives n indices. */
static void resample(const double *w, size_t n, double sum, double u, uint32_t *restrict pos,
                     uint32_t *restrict anc)
{
    const double scale = (double)n / sum;
    const int64_t nn = (int64_t)n;
    /* 0 is a safe filler: unwritten slots follow a written one, whose index is larger. With one
     * particle (n = 1) and rounding, no slot may be written and particle 0 is the answer. */
    memset(pos, 0, n * sizeof *pos);
    int64_t prev = 0;
    double c = 0.0;
    for (size_t i = 0; i < n; i++) {
        c += w[i];
        int64_t k = (int64_t)(c * scale + u);
        k = k < nn ? k : nn;
        int64_t slot = k > prev ? prev : nn;
        pos[slot] = (uint32_t)i;
        prev = k;
    }
    uint32_t a = 0;
    for (size_t j = 0; j < n; j++) {
        a = pos[j] > a ? pos[j] : a;
        anc[j] = a;
    }
}

/* Maps a double to an unsigned key with the same order (sign-magnitude to offset binary). */
static inline uint64_t order_key(double x)
{
    uint64_t b;
    memcpy(&b, &x, sizeof b);
    return b ^ ((uint64_t)((int64_t)b >> 63) | 0x8000000000000000ULL);
}

/* Stable LSD radix sort of the n states by value, 8 bits a pass, skipping passes whose digit is
 * the same for every key (the sign and exponent bytes usually are). Returns the permutation
 * (sorted position -> particle index) in one of f's buffers. NaN states sort to the ends. */
static const uint32_t *sort_states(tf_filter *f, const double *x)
{
    const size_t n = f->n;
    uint64_t *ka = f->key[0], *kb = f->key[1];
    uint32_t *pa = f->perm[0], *pb = f->perm[1];
    uint32_t (*cnt)[256] = f->digit_count;
    memset(cnt, 0, 8 * sizeof *cnt);
    for (size_t i = 0; i < n; i++) {
        uint64_t k = order_key(x[i]);
        ka[i] = k;
        pa[i] = (uint32_t)i;
        for (int d = 0; d < 8; d++)
            cnt[d][(k >> (8 * d)) & 0xFF]++;
    }
    for (int d = 0; d < 8; d++) {
        const int shift = 8 * d;
        if (cnt[d][(ka[0] >> shift) & 0xFF] == n)
            continue;
        uint32_t offset[256], run = 0;
        for (int b = 0; b < 256; b++) {
            offset[b] = run;
            run += cnt[d][b];
        }
        for (size_t i = 0; i < n; i++) {
            uint32_t o = offset[(ka[i] >> shift) & 0xFF]++;
            kb[o] = ka[i];
            pb[o] = pa[i];
        }
        uint64_t *tk = ka;
        ka = kb;
        kb = tk;
        uint32_t *tp = pa;
        pa = pb;
        pb = tp;
    }
    return pa;
}

/* A uniform in [0, 1) from a standard normal by its CDF, Phi(z) = erfc(-z / sqrt 2) / 2 (the
 * constant is 1 / sqrt 2), as the fixed mode needs. */
static double uniform_of(double z)
{
    double u = 0.5 * erfc(-z * 0.70710678118654752440);
    if (!(u >= 0.0))
        return 0.0;
    return u < 1.0 ? u : 1.0 - 0x1.0p-53;
}

/* Index drawn from weights w by the inverse CDF at u in [0, 1); never a zero-weight particle. */
static size_t pick_one(const double *w, size_t n, double sum, double u)
{
    double target = u * sum, c = 0.0;
    size_t last_positive = 0;
    for (size_t i = 0; i < n; i++) {
        if (w[i] > 0)
            last_positive = i;
        c += w[i];
        if (c > target && w[i] > 0)
            return i;
    }
    return last_positive;
}

/* The filter proper. rng != NULL: random numbers from rng. rng == NULL: from z_move and z_pick
 * (fixed mode, particles sorted before each resampling). */
static double run(tf_filter *f, const double *theta, tf_rng *rng, const double *z_move,
                  const double *z_pick, double *path)
{
    const tf_model *m = f->m;
    if (tf_model_check_params(m, theta, NULL) != TF_OK)
        return -INFINITY;
    const double x1_mean = tf_model_x1_mean(m), x1_sd = tf_model_x1_sd(m);
    if (!isfinite(x1_mean) || !(x1_sd > 0 && x1_sd < INFINITY))
        return -INFINITY;
    const tf_growth_type *g = tf_model_growth(m);
    const tf_obs_type *o = tf_model_obs(m);
    const double *p_growth = theta, sigma = theta[g->n_params], *p_obs = theta + g->n_params + 1;
    update_year_constants(f, p_obs);

    const size_t n = f->n, T = f->n_years;
    const int fixed = rng == NULL;
    uint64_t s[4] = {0, 0, 0, 0};
    if (!fixed)
        memcpy(s, rng->s, sizeof s);

    double *x = path ? f->hist : f->x[0];
    if (fixed)
        for (size_t i = 0; i < n; i++)
            x[i] = x1_mean + x1_sd * z_move[i];
    else
        for (size_t i = 0; i < n; i++)
            x[i] = x1_mean + x1_sd * tf_rng_normal_s(s);

    double ll = 0.0, sum = 0.0;
    int weighted = 0;           /* whether w and sum hold the current year's weights */
    const uint32_t *perm = NULL; /* fixed mode: sorted order of the current year */
    for (size_t t = 0; t < T; t++) {
        const int last = t + 1 == T;
        const double *src = x;
        weighted = 0;
        f->resampled[t] = 0;
        if (!isnan(f->y[t])) {
            memset(f->lw, 0, n * sizeof *f->lw);
            o->add_logweight(p_obs, f->y[t], f->log_effort[t], f->year_c + t * TF_OBS_MAX_CONST, x, f->lw, n);
            double mx = max_of(f->lw, n);
            if (!(mx > -INFINITY && mx < INFINITY)) {
                ll = -INFINITY;
                goto done;
            }
            sum = weights(f->lw, f->w, n, mx);
            ll += mx + log(sum / (double)n);
            weighted = 1;
            if (!last || path) {
                const double *wr = f->w;
                double u;
                if (fixed) {
                    perm = sort_states(f, x);
                    for (size_t k = 0; k < n; k++)
                        f->w_sorted[k] = f->w[perm[k]];
                    wr = f->w_sorted;
                    u = uniform_of(z_pick[t]);
                } else {
                    u = last ? 0.0 : tf_rng_uniform_s(s);
                }
                if (!last) {
                    uint32_t *anc = path ? f->anc_hist + t * n : f->anc;
                    resample(wr, n, sum, u, f->pos, anc);
                    if (fixed)
                        for (size_t j = 0; j < n; j++)
                            anc[j] = perm[anc[j]];
                    for (size_t j = 0; j < n; j++)
                        f->xr[j] = x[anc[j]];
                    src = f->xr;
                    f->resampled[t] = 1;
                }
            }
        }
        if (last)
            break;
        double *xn = path ? f->hist + (t + 1) * n : f->x[(t + 1) & 1];
        g->drift(p_growth, src, xn, n);
        if (fixed) {
            const double *z = z_move + (t + 1) * n;
            for (size_t i = 0; i < n; i++)
                xn[i] += sigma * z[i];
        } else {
            for (size_t i = 0; i < n; i++)
                xn[i] += sigma * tf_rng_normal_s(s);
        }
        x = xn;
    }

    if (path) {
        double u = fixed ? uniform_of(z_pick[T - 1]) : tf_rng_uniform_s(s);
        size_t k;
        if (!weighted)
            k = (size_t)(u * (double)n) < n ? (size_t)(u * (double)n) : n - 1;
        else if (fixed)
            k = perm[pick_one(f->w_sorted, n, sum, u)];
        else
            k = pick_one(f->w, n, sum, u);
        for (size_t t = T; t-- > 0;) {
            path[t] = f->hist[t * n + k];
            if (t > 0 && f->resampled[t - 1])
                k = f->anc_hist[(t - 1) * n + k];
        }
    }
done:
    if (!fixed)
        memcpy(rng->s, s, sizeof s);
    return ll;
}

double tf_filter_loglik(tf_filter *f, const double *theta, tf_rng *rng, double *path)
{
    return run(f, theta, rng, NULL, NULL, path);
}

double tf_filter_loglik_fixed(tf_filter *f, const double *theta, const double *z_move, const double *z_pick,
                              double *path)
{
    return run(f, theta, NULL, z_move, z_pick, path);
}
