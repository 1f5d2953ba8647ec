/* Particle filter for one series: particles are log-abundances kept as plain double arrays, each
 * year is a few passes over them that the compiler vectorises (see the Makefile's HOT_CFLAGS and
 * model/vector_math.h), weights are handled in log space, and resampling is systematic (Kitagawa
 * 1996, J. Comput. Graph. Stat. 5:1, Appendix) in a branch-free form.
 *
 * Two proposals. The bootstrap filter (Gordon, Salmond & Smith 1993, IEE Proc. F 140:107) moves
 * particles by the growth model alone and weights them by the count. The guided filter (the
 * default) is an auxiliary particle filter (Pitt & Shephard 1999, JASA 94:590) built on the count
 * model's Gaussian pseudo-observation N(mode; x, 1/prec) of the year ahead (tf_obs_type.pseudo_obs):
 *  - look-ahead resampling: particle i of year t is resampled with weight W_i v_i, where
 *    v_i = N(mode; m_i, sigma^2 + 1/prec) is the pseudo-observation's predictive density and
 *    m_i = drift(x_i);
 *  - guided move: the child is drawn from the product of the growth step's normal N(m, sigma^2)
 *    and the pseudo-observation, N(mu, 1/P) with P = 1/sigma^2 + prec and
 *    mu = (m / sigma^2 + mode prec) / P (the locally optimal proposal of the Gaussian model;
 *    Doucet, Godsill & Andrieu 2000, Stat. Comput. 10:197, section II.D), its tails stretched
 *    (below) unless the pseudo-observation is exact;
 *  - second-stage weight p(y | x) N(x; m, sigma^2) / (v q(x)), which for the Gaussian proposal is
 *    p(y | x) / N(mode; x, 1/prec): for Gompertz growth with log-normal counts it is constant and
 *    the filter is fully adapted.
 * The likelihood estimate is the product over years of (sum_i W_i v_i) times the mean second-stage
 * weight, which is unbiased for any first-stage weights and proposal that depend only on the past
 * (Pitt, Silva, Giordani & Kohn 2012, J. Econometrics 171:134, Theorem 1; Johansen & Doucet 2008,
 * Stat. Probab. Lett. 78:1498); the bootstrap filter is the case v = 1, q = the growth step (Del
 * Moral 2004, Feynman-Kac Formulae, Thm 7.4.2). Since the weights W_i are those of the previous
 * year's second stage, the two sums meet in one: each year adds log of the mean of
 * exp(lw_i + ln v_i), and a year not followed by a look-ahead adds log mean exp(lw_i). Years
 * without a count, and counts without a mode (a zero under the count models), move as the
 * bootstrap does. Its log is returned. */
#include "filter/filter.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "model/vector_math.h"

/* Weights are exp(lw - max) with lw - max clamped here: exp takes a slow path below about -708
 * (subnormal results), and weights below e^-500 change the sum of N weights by at most
 * N e^-500, far below double precision. Such particles get weight exactly 0. */
#define LOG_WEIGHT_FLOOR (-500.0)

/* The guided move draws x = mu + s h(z), h(z) = z (1 + TAIL_STRETCH z^2), z standard normal: a
 * monotone stretch that leaves the centre nearly Gaussian (h(2) = 2.4 z) but gives tails like
 * exp(-c |x|^(2/3)), heavier than the growth step's Gaussian, so that the ratio of the growth
 * density to the proposal density, hence every weight, stays bounded however far a count lies
 * from what the model predicts (an outlier, a misspecified model) and however much narrower the
 * pseudo-observation's Gaussian is than the true likelihood in its tails (a defensive proposal in
 * the sense of Hesterberg 1995, Technometrics 37:185, reached here without an extra random
 * number, so that the fixed-random-number mode stays continuous in its numbers). Its density is
 * known from z: q(x) = phi(z) / (s h'(z)), h'(z) = 1 + 3 delta z^2. The stretch used is
 * delta = TAIL_STRETCH k / (1 + k), k = sigma^2 prec: the more the count narrows the move below
 * the growth step's own spread, the heavier the tails; a count that says little next to the
 * process noise (k near 0) leaves the move the growth step, which needs no defence, and leaves
 * no extra noise in the weights. The value 0.05 costs nothing measurable in the spread of the
 * estimate on the series of tests/unit/test_filter.c, including one count ten times too high or
 * too low (0.2 raised it by a third): common practice, no source. Exact pseudo-observations
 * (log-normal counts) are not stretched: the filter stays fully adapted. */
#define TAIL_STRETCH 0.05

/* Blocks of independent accumulators, so that max and sum reductions vectorise without
 * reassociating a single chain (which -O3 without -ffast-math may not do). */
#define N_ACC 8

struct tf_filter {
    const tf_model *m;
    tf_proposal proposal;
    size_t n, n_years;
    const double *y;          /* borrowed counts, NAN = not surveyed */
    const tf_series *s;       /* borrowed: the removals and releases between the years */
    double *log_effort;       /* n_years */
    double *year_c;           /* n_years * TF_OBS_MAX_CONST: the observation model's year constants */
    double year_c_key[TF_MAX_PARAMS]; /* observation parameters year_c was computed for */
    int year_c_ready;
    /* The pseudo-observation of each year (computed with year_c): its kind, mode and precision. */
    unsigned char *pkind;
    double *pmode, *pprec;
    double *x[2];             /* states of this year and the next when no path is wanted */
    double *hist;             /* n_years * n states, when a path is wanted */
    uint32_t *anc_hist;       /* n_years * n: parent (in year t) of particle j of year t + 1 */
    unsigned char *resampled; /* n_years: whether year t was followed by resampling */
    double *lw, *w, *xr;      /* n each: log weights, weights (or the guided move's normals),
                               * the drifted states m_i of this year's particles */
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
    f->n = n;
    f->n_years = T;
    f->y = tf_series_counts(s);
    f->s = s;
    f->log_effort = malloc(T * sizeof *f->log_effort);
    f->year_c = calloc(T * TF_OBS_MAX_CONST, sizeof *f->year_c);
    f->pkind = calloc(T, 1);
    f->pmode = calloc(T, sizeof *f->pmode);
    f->pprec = calloc(T, sizeof *f->pprec);
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
    if (!f->log_effort || !f->year_c || !f->pkind || !f->pmode || !f->pprec || !f->x[0] || !f->x[1] || !f->hist || !f->anc_hist || !f->resampled ||
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
    free(f->pkind);
    free(f->pmode);
    free(f->pprec);
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

void tf_filter_set_proposal(tf_filter *f, tf_proposal p)
{
    if (f)
        f->proposal = p;
}
tf_proposal tf_filter_proposal(const tf_filter *f) { return f->proposal; }

const char *tf_filter_proposal_name(tf_proposal p) { return p == TF_PROPOSAL_BOOTSTRAP ? "bootstrap" : "guided"; }

int tf_filter_proposal_parse(const char *name, tf_proposal *out)
{
    if (name && !strcmp(name, "guided"))
        *out = TF_PROPOSAL_GUIDED;
    else if (name && !strcmp(name, "bootstrap"))
        *out = TF_PROPOSAL_BOOTSTRAP;
    else
        return 0;
    return 1;
}
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
    for (size_t t = 0; t < f->n_years; t++) {
        f->pkind[t] = TF_PSEUDO_NONE;
        if (isnan(f->y[t]))
            continue;
        o->year_const(p_obs, f->y[t], f->year_c + t * TF_OBS_MAX_CONST);
        double mode = 0, prec = 0;
        int kind = o->pseudo_obs ? o->pseudo_obs(p_obs, f->y[t], f->log_effort[t], &mode, &prec) : TF_PSEUDO_NONE;
        if (kind != TF_PSEUDO_NONE && isfinite(mode) && prec > 0 && prec < INFINITY) {
            f->pkind[t] = (unsigned char)kind;
            f->pmode[t] = mode;
            f->pprec[t] = prec;
        }
    }
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

/* Newton steps that re-centre a year's pseudo-observation (at most one unit of x each, so
 * that a step from far out cannot overshoot; 6 steps from the Laplace start reach the maximum
 * to rounding on every series of the tests). A fixed number, so that the estimate stays a
 * smooth function of the random numbers in the fixed mode. */
#define RECENTRE_STEPS 6
/* Counts within this many sd of the particles' predictive keep the Laplace approximation at
 * their own mode (common practice, no source: there the two expansions differ little). */
#define RECENTRE_Z 2.0

/* A year's Gaussian pseudo-observation in the form the filter uses: log p(y | x) is taken as
 * b u - prec u^2 / 2 + const with u = x - x0, about an expansion point x0. The counting-error
 * model gives it at the count's own mode (x0 = mode, b = 0; Laplace's approximation). For an
 * approximate one it is re-expanded here about the maximum x* of N(x; centre, s2) p(y | x),
 * centre the mean of the particles' drifted states: b and prec become the slope and curvature of
 * log p(y | x) at x* (linearising the log of the optimal proposal where the particles will go;
 * Doucet, Godsill & Andrieu 2000, Stat. Comput. 10:197, section II.D.2). Near the count's mode
 * this changes little; it matters when a count lies far from what the model predicts, where a
 * Gaussian fitted at the count's own mode misjudges the count's pull on the particles (the
 * negative binomial's log-likelihood is far from quadratic there, and nearly linear: prec near
 * 0 and b large, which this form holds without the far-away mode a (mode, prec) form would
 * need). Derivatives in s2-scaled form keep a noise whose square underflows (s2 = 0: x* =
 * centre). Left as given when a step or the result is not finite or the curvature is positive. */
typedef struct {
    double x0, b, prec;
} pseudo;

/* How far (in log-abundance) from the count's mode a drifted state may pull the centre: a factor
 * e^20 = 5e8 between abundance and count, beyond any survey (common practice, no source). */
#define CENTRE_RANGE 20.0

static pseudo recentre(const tf_obs_type *o, const double *p_obs, double y, double log_effort, double centre,
                       double s2, pseudo ps)
{
    double x = (centre + s2 * ps.prec * ps.x0) / (1.0 + s2 * ps.prec), d1 = NAN, d2 = NAN;
    if (!isfinite(x))
        return ps;
    for (int it = 0; it < RECENTRE_STEPS; it++) {
        o->dlogp(p_obs, y, log_effort, x, &d1, &d2);
        double step = (s2 * d1 - (x - centre)) / (1.0 - s2 * d2);
        if (!isfinite(step))
            return ps;
        x += step > 1.0 ? 1.0 : (step < -1.0 ? -1.0 : step);
    }
    o->dlogp(p_obs, y, log_effort, x, &d1, &d2);
    /* d1^2 finite too: the first stage squares the slope. */
    if (!(d2 <= 0) || !isfinite(d1 * d1) || !isfinite(d2))
        return ps;
    return (pseudo){x, d1, -d2};
}

/* The look-ahead's terms for particle i, b d_i - prec d_i^2 / 2 (d_i = m_i - x0), come back with
 * the opposite sign in its child's weight; they cancel in exact arithmetic but each carries a
 * rounding error of about 1e-16 of its size. Beyond TERM_MAX (an error of 1e-4 on the log-
 * likelihood) the year moves as the bootstrap does. Only parameter sets far outside any
 * posterior reach it (a chaotic Ricker map whose states spread over 1e29 log units); the largest
 * real case, a count of 10^6 met by a first-year prior 4 sd away, makes 2e7. */
#define TERM_MAX 1e12

/* One pass over the drifted states m[0 .. n): the range [*lo, *hi] of the finite ones (empty,
 * *lo > *hi, when none is) and the mean of all, each clamped to [c_lo, c_hi] (the centre the
 * pseudo-observation is re-expanded about). */
static void scan_states(const double *m, size_t n, double c_lo, double c_hi, double *lo, double *hi,
                        double *centre)
{
    double l = INFINITY, h = -INFINITY, sum = 0.0;
    for (size_t i = 0; i < n; i++) {
        double v = m[i];
        if (isfinite(v)) {
            l = v < l ? v : l;
            h = v > h ? v : h;
        }
        double c = v > c_lo ? v : c_lo;
        sum += c < c_hi ? c : c_hi;
    }
    *lo = l;
    *hi = h;
    *centre = sum / (double)n;
}

/* Whether the pseudo-observation ps may guide the moves of particles whose finite drifted states
 * span [lo, hi]: the largest |b d| + prec d^2, d = m - x0, stays below TERM_MAX. */
static int usable(double lo, double hi, pseudo ps)
{
    if (lo > hi)
        return 1;
    double d = fmax(fabs(lo - ps.x0), fabs(hi - ps.x0));
    return fabs(ps.b) * d + ps.prec * d * d < TERM_MAX;
}

/* One guided move: with d_j = m[a_j] - x0 (a_j = anc[j], or j when anc is NULL), the child is
 * x[j] = x0 + (d_j + shift) c1 + sd h(z[j]) (the product of N(m, s2) and the pseudo-observation,
 * shift = b s2, c1 = 1 / (1 + s2 prec), sd = noise sqrt(c1), stretched by h), and lw[j] receives
 * the second-stage weight's terms other than log p(y | x): minus the pseudo-observation,
 * -(b u - prec u^2 / 2), u = x - x0, and, when stretched, log(q_gauss(x) / q(x)) =
 * (z^2 - h^2) / 2 + log h'(z). One vectorisable loop (log1p from libmvec). */
static void guided_move(const double *restrict m, const uint32_t *restrict anc, const double *restrict z,
                        pseudo ps, double shift, double c1, double sd, double stretch, double *restrict x,
                        double *restrict lw, size_t n)
{
    const double x0 = ps.x0, b = ps.b, half_prec = 0.5 * ps.prec;
    if (stretch == 0.0) {
        for (size_t j = 0; j < n; j++) {
            double mj = anc ? m[anc[j]] : m[j];
            double u = (mj - x0 + shift) * c1 + sd * z[j];
            x[j] = x0 + u;
            lw[j] = (half_prec * u - b) * u;
        }
        return;
    }
    const double three_stretch = 3.0 * stretch;
    for (size_t j = 0; j < n; j++) {
        double mj = anc ? m[anc[j]] : m[j];
        double zj = z[j], z2 = zj * zj, h = zj * (1.0 + stretch * z2);
        double u = (mj - x0 + shift) * c1 + sd * h;
        x[j] = x0 + u;
        lw[j] = (half_prec * u - b) * u + 0.5 * (z2 - h * h) + log1p(three_stretch * z2);
    }
}

/* Resamples the n particles x by the weights exp(lw) (their log-mean added to *ll): anc receives
 * the parents. In fixed mode the particles are sorted by state first and the offset comes from
 * z_pick; otherwise from the stream s. Returns 0 when every weight is zero or one is infinite. */
static int resample_by(tf_filter *f, const double *x, double *ll, const double *z_pick_t, uint64_t *s,
                       uint32_t *anc)
{
    const size_t n = f->n;
    double mx = max_of(f->lw, n);
    if (!(mx > -INFINITY && mx < INFINITY))
        return 0;
    double sum = weights(f->lw, f->w, n, mx);
    *ll += mx + log(sum / (double)n);
    if (z_pick_t) {
        const uint32_t *perm = sort_states(f, x);
        for (size_t k = 0; k < n; k++)
            f->w_sorted[k] = f->w[perm[k]];
        resample(f->w_sorted, n, sum, uniform_of(*z_pick_t), f->pos, anc);
        for (size_t j = 0; j < n; j++)
            anc[j] = perm[anc[j]];
    } else {
        resample(f->w, n, sum, tf_rng_uniform_s(s), f->pos, anc);
    }
    return 1;
}

/* The filter proper. rng != NULL: random numbers from rng. rng == NULL: from z_move and z_pick
 * (fixed mode, particles sorted before each resampling). The year loop is the auxiliary filter of
 * the top of this file; with the bootstrap proposal, and in years without a pseudo-observation,
 * it is the bootstrap filter step for step, with the same random numbers. */
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
    const int fixed = rng == NULL, guided = f->proposal == TF_PROPOSAL_GUIDED;
    uint64_t s[4] = {0, 0, 0, 0};
    if (!fixed)
        memcpy(s, rng->s, sizeof s);

    double ll = 0.0;
    int weighted = 0; /* whether lw holds the second-stage weights of the current particles */
    double *x = NULL;
    for (size_t t = 0; t < T; t++) {
        /* The move into year t: from the first-year prior (one virtual parent with drift x1_mean
         * and noise x1_sd, so that year 0 takes the same guided step), or from the particles x of
         * year t - 1, whose drifted states m_i go to f->xr. */
        double *xn = path ? f->hist + t * n : f->x[t & 1];
        const double noise = t == 0 ? x1_sd : sigma, s2 = noise * noise;
        int info = guided && f->pkind[t] != TF_PSEUDO_NONE;
        double *mv = f->xr;
        const uint32_t *anc = NULL;
        if (t == 0) {
            for (size_t i = 0; i < n; i++)
                mv[i] = x1_mean;
        } else if (tf_series_has_actions(f->s)) {
            /* Removals and releases after year t - 1's count act on the number there, before it
             * grows (model.h); the same step with every take 0 is the plain drift below. */
            memcpy(mv, x, n * sizeof *mv);
            tf_model_take(tf_series_take(f->s, t - 1), mv, n);
            tf_model_drift_alive(g, p_growth, mv, mv, n);
        } else {
            g->drift(p_growth, x, mv, n);
        }
        pseudo ps = {f->pmode[t], 0.0, f->pprec[t]};
        if (info) {
            /* The centre is the mean of the drifted states, each clamped to within CENTRE_RANGE
             * of the count's mode, so that a few particles thrown far off (a chaotic growth map at
             * a wild parameter set) cannot drag it away from where the rest are. */
            double lo, hi, centre;
            scan_states(mv, n, ps.x0 - CENTRE_RANGE, ps.x0 + CENTRE_RANGE, &lo, &hi, &centre);
            /* Only a surprising count, more than RECENTRE_Z sd of the predictive from the centre,
             * is worth the Newton steps (a few exp each, per year: at a dozen particles they would
             * otherwise cost as much as the particles themselves). */
            double dz = centre - ps.x0;
            if (f->pkind[t] != TF_PSEUDO_EXACT && dz * dz * ps.prec > RECENTRE_Z * RECENTRE_Z * (1.0 + s2 * ps.prec))
                ps = recentre(o, p_obs, f->y[t], f->log_effort[t], centre, s2, ps);
            info = usable(lo, hi, ps);
        }
        /* The first stage: v_i = integral of N(x; m_i, s2) exp(b u - prec u^2 / 2) dx, whose log is
         * -ln(1 + k) / 2 + (2 b d_i + b^2 s2 - prec d_i^2) / (2 (1 + k)), d_i = m_i - x0,
         * k = s2 prec (completing the square; it holds for prec = 0, an exponential tilt). */
        const double k = s2 * ps.prec, c1 = 1.0 / (1.0 + k), half_c1 = 0.5 * c1, shift = ps.b * s2, bbs2 = shift * ps.b;
        if (info)
            ll -= 0.5 * log1p(k);
        if (t == 0) {
            if (info) {
                double d = x1_mean - ps.x0;
                ll += (2.0 * ps.b * d + bbs2 - ps.prec * d * d) * half_c1;
            }
        } else {
            if (info) {
                if (!weighted)
                    memset(f->lw, 0, n * sizeof *f->lw);
                for (size_t i = 0; i < n; i++) {
                    double d = mv[i] - ps.x0;
                    f->lw[i] += (2.0 * ps.b * d + bbs2 - ps.prec * d * d) * half_c1;
                }
            }
            f->resampled[t - 1] = (unsigned char)(weighted || info);
            if (weighted || info) {
                uint32_t *a = path ? f->anc_hist + (t - 1) * n : f->anc;
                if (!resample_by(f, x, &ll, fixed ? z_pick + (t - 1) : NULL, s, a)) {
                    ll = -INFINITY;
                    goto done;
                }
                anc = a;
            }
        }
        const double *z = fixed ? z_move + t * n : NULL;
        if (info) {
            if (!fixed) {
                for (size_t j = 0; j < n; j++)
                    f->w[j] = tf_rng_normal_s(s);
                z = f->w;
            }
            const double stretch = f->pkind[t] == TF_PSEUDO_EXACT ? 0.0 : TAIL_STRETCH * k * c1;
            guided_move(mv, anc, z, ps, shift, c1, noise * sqrt(c1), stretch, xn, f->lw, n);
        } else {
            if (anc)
                for (size_t j = 0; j < n; j++)
                    xn[j] = mv[anc[j]];
            else
                memcpy(xn, mv, n * sizeof *xn);
            if (fixed)
                for (size_t i = 0; i < n; i++)
                    xn[i] += noise * z[i];
            else
                for (size_t i = 0; i < n; i++)
                    xn[i] += noise * tf_rng_normal_s(s);
        }
        x = xn;
        weighted = !isnan(f->y[t]);
        if (weighted) {
            if (!info)
                memset(f->lw, 0, n * sizeof *f->lw);
            o->add_logweight(p_obs, f->y[t], f->log_effort[t], f->year_c + t * TF_OBS_MAX_CONST, x, f->lw, n);
        }
    }

    double sum = 0.0;
    if (weighted) {
        double mx = max_of(f->lw, n);
        if (!(mx > -INFINITY && mx < INFINITY)) {
            ll = -INFINITY;
            goto done;
        }
        sum = weights(f->lw, f->w, n, mx);
        ll += mx + log(sum / (double)n);
    }
    if (path) {
        double u = fixed ? uniform_of(z_pick[T - 1]) : tf_rng_uniform_s(s);
        size_t k;
        if (!weighted) {
            k = (size_t)(u * (double)n) < n ? (size_t)(u * (double)n) : n - 1;
        } else if (fixed) {
            const uint32_t *perm = sort_states(f, x);
            for (size_t i = 0; i < n; i++)
                f->w_sorted[i] = f->w[perm[i]];
            k = perm[pick_one(f->w_sorted, n, sum, u)];
        } else {
            k = pick_one(f->w, n, sum, u);
        }
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
