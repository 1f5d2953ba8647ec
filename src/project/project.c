/* Forward simulation of the growth model from parameter draws, summarised as abundance bands,
 * quasi-extinction risk curves and decline probabilities. */
#include "project/project.h"

#include <assert.h>
#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The most simulated futures one call accepts: five doubles and one flag per threshold and run,
 * so 10^7 runs need about 0.5 GB. Far beyond what a Monte Carlo error of 0.0002 (10^7 runs) needs. */
#define MAX_RUNS 10000000u

static const double band_levels[TF_BAND_COUNT] = {0.025, 0.25, 0.5, 0.75, 0.975};

struct tf_projection {
    size_t horizon;
    size_t n_runs;
    size_t n_inputs;
    size_t *input_runs;      /* n_inputs */
    double *bands;           /* (horizon + 1) x TF_BAND_COUNT */
    size_t n_thresholds;
    tf_threshold thresholds[TF_PROJECT_MAX_THRESHOLDS];
    double *risk;            /* n_thresholds x (horizon + 1) */
    double median_time[TF_PROJECT_MAX_THRESHOLDS];
    size_t n_windows;
    size_t windows[2];
    size_t n_declines;
    double declines[TF_PROJECT_MAX_DECLINES];
    double decline_prob[2][TF_PROJECT_MAX_DECLINES];
    /* keep_runs: each run's first year at or below each threshold (NEVER_HIT when it never was),
     * n_thresholds x n_runs, and its log change x - x0 at the end of each window, n_windows x
     * n_runs; NULL otherwise. */
    unsigned short *first_hit;
    double *change;
    /* With management actions a run can die out: its bands read 0, not e^-50. */
    int zero_extinct;
};

/* The horizon is at most TF_PROJECT_MAX_HORIZON (1000), so a year fits an unsigned short. */
#define NEVER_HIT 0xFFFFu

/* A run of consecutive futures that share one parameter draw: the drift is applied to them in
 * one call. */
typedef struct {
    const tf_growth_type *growth;
    const double *theta;
    const double *theta_act; /* theta with the action's capacity; theta when it has none */
    size_t start, n;
} block;

/* Everything the simulation needs, allocated once before the year loop. */
typedef struct {
    double *x, *x0, *sigma, *z, *scratch;
    unsigned char *hit;      /* n_thresholds x n_runs: at or below threshold k at least once */
    unsigned char *gone;     /* with actions: the run is extinct before this year's growth */
    double *theta_act;       /* with a capacity action: n_blocks x TF_MAX_PARAMS */
    block *blocks;
    size_t n_blocks;
} workspace;

/* ---- thresholds ---------------------------------------------------------------------------- */

tf_status tf_project_parse_thresholds(const char *text, tf_threshold *out, size_t max, size_t *n_out,
                                      tf_error *err)
{
    static const char *hint = "give abundances or percentages of the current abundance, e.g. 50,100,20%";
    size_t n = 0;
    const char *p = text;
    *n_out = 0;
    for (;;) {
        const char *end = strchr(p, ',');
        size_t len = end ? (size_t)(end - p) : strlen(p);
        char item[64];
        if (len == 0 || len >= sizeof item)
            return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, hint, "threshold list '%s': %s entry", text,
                                len == 0 ? "empty" : "overlong");
        memcpy(item, p, len);
        item[len] = '\0';
        int relative = item[len - 1] == '%';
        if (relative)
            item[--len] = '\0';
        char *stop;
        double v = len ? strtod(item, &stop) : NAN;
        if (!len || *stop != '\0' || !isfinite(v))
            return tf_error_add(err, TF_ERR_PARSE, NULL, 0, 0, hint, "threshold '%.*s' is not a number",
                                (int)(len + (size_t)relative), p);
        if (v <= 0 || (relative && v > 100))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, hint,
                                relative ? "threshold %s%% must be above 0 and at most 100 %%"
                                         : "threshold %s must be above 0 animals",
                                item);
        if (n == max)
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "more than %zu thresholds", max);
        out[n].value = relative ? v / 100.0 : v;
        out[n].relative = relative;
        n++;
        if (!end)
            break;
        p = end + 1;
    }
    *n_out = n;
    return TF_OK;
}

char *tf_project_threshold_label(const tf_threshold *t, char *buf, size_t size)
{
    if (t->relative)
        snprintf(buf, size, "%.10g%%", t->value * 100.0);
    else
        snprintf(buf, size, "%.10g", t->value);
    return buf;
}

/* ---- options and validation ---------------------------------------------------------------- */

int tf_project_action_is_zero(const tf_project_action *a)
{
    return a->share == 0 && a->take == 0 && a->growth == 0 && (a->capacity == 0 || a->capacity == 1);
}

int tf_project_capacity_index(const tf_growth_type *g)
{
    for (size_t j = 0; j < g->n_params; j++)
        if (!strcmp(g->param_names[j], "K"))
            return (int)j;
    return -1;
}

static int acts(const tf_project_options *o)
{
    return !tf_project_action_is_zero(&o->status_quo) || (o->action_from > 0 && !tf_project_action_is_zero(&o->action));
}

static int has_capacity(const tf_project_action *a)
{
    return a->capacity != 0 && a->capacity != 1;
}

void tf_project_options_init(tf_project_options *o)
{
    memset(o, 0, sizeof *o);
    o->horizon = TF_PROJECT_DEFAULT_HORIZON;
    o->n_declines = 3;
    o->declines[0] = 0.3;
    o->declines[1] = 0.5;
    o->declines[2] = 0.8;
}

double tf_project_se(double p, size_t n)
{
    if (n == 0 || !(p >= 0 && p <= 1))
        return NAN;
    return sqrt(p * (1.0 - p) / (double)n);
}

double tf_project_band_level(tf_band b)
{
    return (unsigned)b < TF_BAND_COUNT ? band_levels[b] : NAN;
}

tf_status tf_project_check_options(const tf_project_options *o, tf_error *err)
{
    if (o->horizon < 1 || o->horizon > TF_PROJECT_MAX_HORIZON)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "projection horizon %zu is outside 1..%d years",
                            o->horizon, TF_PROJECT_MAX_HORIZON);
    if (o->n_runs > MAX_RUNS)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "%zu runs is more than the %u allowed", o->n_runs,
                            MAX_RUNS);
    if (o->n_thresholds > TF_PROJECT_MAX_THRESHOLDS)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "more than %d thresholds",
                            TF_PROJECT_MAX_THRESHOLDS);
    for (size_t k = 0; k < o->n_thresholds; k++) {
        const tf_threshold *t = &o->thresholds[k];
        if (!(t->value > 0 && isfinite(t->value)) || (t->relative && t->value > 1))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "threshold %zu (%g%s) is out of range", k + 1,
                                t->relative ? 100 * t->value : t->value, t->relative ? "%" : "");
    }
    if (o->n_declines > TF_PROJECT_MAX_DECLINES)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "more than %d declines", TF_PROJECT_MAX_DECLINES);
    for (size_t d = 0; d < o->n_declines; d++)
        if (!(o->declines[d] > 0 && o->declines[d] < 1))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "decline %g is not a fraction in (0, 1)",
                                o->declines[d]);
    if (o->decline_window > TF_PROJECT_MAX_HORIZON)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "decline window %zu is longer than %d years",
                            o->decline_window, TF_PROJECT_MAX_HORIZON);
    const tf_project_action *sq = &o->status_quo, *a = &o->action;
    if (!isfinite(sq->take) || sq->share != 0 || sq->growth != 0 || has_capacity(sq))
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL,
                            "the status quo of a projection is a finite yearly take only");
    if (!(a->share >= 0 && a->share < 1) || !isfinite(a->take) || !isfinite(a->growth) ||
        !(a->capacity >= 0 && isfinite(a->capacity)))
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL,
                            "projection action out of range (share %g, take %g, growth %g, capacity %g)", a->share,
                            a->take, a->growth, a->capacity);
    if (o->start != 0 && !(o->start > 0 && log(o->start) >= TF_PROJECT_LOG_MIN && log(o->start) <= TF_PROJECT_LOG_MAX))
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "the start must be a positive abundance below 5e21",
                            "starting abundance %g is outside the projection's range", o->start);
    return TF_OK;
}

/* Every draw of an input that will be used must be a valid starting point: drift parameters
 * inside the growth model's open support, sigma >= 0 (0 = a deterministic projection), start
 * within the log-abundance bounds (unless own_start is 0: one start for all, checked with the
 * options). */
static tf_status check_input(const tf_project_input *in, size_t i, int own_start, tf_error *err)
{
    const tf_growth_type *g = in->growth;
    if (!g || !g->drift || !in->draws || (own_start && !in->x_last) || in->n_draws == 0)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "model %zu has no growth model or no draws", i + 1);
    if (in->n_params < g->n_params || in->sigma_index >= in->n_params || in->sigma_index < g->n_params)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "model %zu: %zu parameters per draw do not hold %zu drift parameters and sigma", i + 1,
                            in->n_params, g->n_params);
    for (size_t d = 0; d < in->n_draws; d++) {
        const double *th = in->draws + d * in->n_params;
        for (size_t j = 0; j < g->n_params; j++) {
            double lo = g->lower ? g->lower[j] : -INFINITY, hi = g->upper ? g->upper[j] : INFINITY;
            if (!(isfinite(th[j]) && th[j] > lo && th[j] < hi))
                return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL,
                                    "model %zu (%s), draw %zu: %s = %g is outside (%g, %g)", i + 1, g->name, d + 1,
                                    g->param_names[j], th[j], lo, hi);
        }
        double s = th[in->sigma_index];
        if (!(s >= 0 && isfinite(s)))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "model %zu (%s), draw %zu: sigma = %g is not >= 0",
                                i + 1, g->name, d + 1, s);
        if (!own_start)
            continue;
        double x = in->x_last[d];
        if (!(x >= TF_PROJECT_LOG_MIN && x <= TF_PROJECT_LOG_MAX))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "the start must be a positive abundance below 5e21",
                                "model %zu (%s), draw %zu: starting log-abundance %g is outside [%g, %g]", i + 1,
                                g->name, d + 1, x, TF_PROJECT_LOG_MIN, TF_PROJECT_LOG_MAX);
    }
    return TF_OK;
}

tf_project_input tf_project_input_from_model(const tf_model *m, const double *draws, size_t n_draws,
                                             const double *x_last, double weight)
{
    tf_project_input in = {
        .growth = tf_model_growth(m),
        .sigma_index = tf_model_sigma_index(m),
        .n_params = tf_model_n_params(m),
        .n_draws = n_draws,
        .draws = draws,
        .x_last = x_last,
        .weight = weight,
    };
    return in;
}

/* Largest-remainder (Hamilton) apportionment of n_runs among the inputs by weight. Inputs of weight
 * 0 get nothing; equal remainders go to the earlier input. The floors fall short of n_runs by fewer
 * runs than there are inputs of positive weight (the quotas add up to n_runs to within n eps n_runs,
 * far below one run), so each such input gets at most one extra run. */
static void share_runs(const tf_project_input *in, size_t n_inputs, double total_w, size_t n_runs, size_t *runs)
{
    double rem[TF_PROJECT_MAX_INPUTS];
    size_t given = 0;
    for (size_t i = 0; i < n_inputs; i++) {
        double quota = (double)n_runs * (in[i].weight / total_w);
        double fl = floor(quota);
        runs[i] = fl > (double)n_runs ? n_runs : (size_t)fl;
        rem[i] = in[i].weight > 0 ? quota - fl : -1.0;
        given += runs[i];
    }
    while (given < n_runs) {
        size_t best = 0;
        for (size_t i = 1; i < n_inputs; i++)
            if (rem[i] > rem[best])
                best = i;
        assert(rem[best] >= 0);
        runs[best]++;
        rem[best] = -1.0;
        given++;
    }
}

/* ---- simulation ------------------------------------------------------------------------------ */

static void workspace_free(workspace *w)
{
    free(w->x);
    free(w->x0);
    free(w->sigma);
    free(w->z);
    free(w->scratch);
    free(w->hit);
    free(w->gone);
    free(w->theta_act);
    free(w->blocks);
}

void tf_projection_free(tf_projection *p)
{
    if (!p)
        return;
    free(p->input_runs);
    free(p->bands);
    free(p->risk);
    free(p->first_hit);
    free(p->change);
    free(p);
}

/* Lays the runs out input by input, draw by draw, and sets each run's start (x_start for all
 * when it is not NAN) and sigma; with w->theta_act, each block's parameters with K times
 * capacity. */
static void lay_out_runs(const tf_project_input *in, size_t n_inputs, const size_t *runs, double x_start,
                         double capacity, workspace *w)
{
    size_t start = 0, nb = 0;
    for (size_t i = 0; i < n_inputs; i++) {
        size_t R = runs[i], D = in[i].n_draws;
        if (R == 0)
            continue;
        for (size_t d = 0; d < D; d++) {
            /* Draw d's share, floor(d R / D) .. floor((d+1) R / D), in exact integer arithmetic. */
            size_t a = (size_t)((uint64_t)d * R / D), b = (size_t)((uint64_t)(d + 1) * R / D);
            if (a == b)
                continue;
            const double *theta = in[i].draws + d * in[i].n_params;
            const double *theta_act = theta;
            if (w->theta_act) {
                /* The action's carrying capacity: K times the factor, in a copy of the draw. */
                double *copy = w->theta_act + nb * TF_MAX_PARAMS;
                memcpy(copy, theta, in[i].growth->n_params * sizeof *copy);
                int k = tf_project_capacity_index(in[i].growth);
                if (k >= 0)
                    copy[k] *= capacity;
                theta_act = copy;
            }
            w->blocks[nb++] = (block){in[i].growth, theta, theta_act, start + a, b - a};
            for (size_t j = start + a; j < start + b; j++) {
                w->x0[j] = isnan(x_start) ? in[i].x_last[d] : x_start;
                w->sigma[j] = theta[in[i].sigma_index];
            }
        }
        start += R;
    }
    w->n_blocks = nb;
}

/* Rearranges a[0..n) so that a[k] holds the value a full sort would put there, with no larger value
 * before it and no smaller one after (Wirth 1976, Algorithms + Data Structures = Programs, "finding
 * the median"; after Hoare 1961, CACM Algorithm 65 FIND). Expected O(n), in place, no allocation.
 * Signed indices: j may step to lo - 1. */
static void select_kth(double *a, size_t n, size_t k_)
{
    ptrdiff_t lo = 0, hi = (ptrdiff_t)n - 1, k = (ptrdiff_t)k_;
    while (lo < hi) {
        double pivot = a[k];
        ptrdiff_t i = lo, j = hi;
        do {
            while (a[i] < pivot)
                i++;
            while (pivot < a[j])
                j--;
            if (i <= j) {
                double t = a[i];
                a[i] = a[j];
                a[j] = t;
                i++;
                j--;
            }
        } while (i <= j);
        if (j < k)
            lo = i;
        if (k < i)
            hi = j;
    }
}

/* Quantile q of exp(a[0..n)) by linear interpolation between order statistics, the same
 * arithmetic as gsl_stats_quantile_from_sorted_data (Hyndman & Fan 1996, definition 7) but by
 * selection instead of a sort. exp is increasing, so order statistics of a give those of exp(a).
 * Reorders a. */
/* exp(x), or 0 for an extinct state (model/model.h) when zero_extinct. */
static double abundance_of(double x, int zero_extinct)
{
    return zero_extinct && x <= TF_MODEL_EXTINCT_BELOW ? 0.0 : exp(x);
}

static double quantile_exp(double *a, size_t n, double q, int zero_extinct)
{
    double delta = (double)(n - 1) * q;
    size_t lhs = (size_t)delta;
    delta -= (double)lhs;
    select_kth(a, n, lhs);
    if (lhs == n - 1)
        return abundance_of(a[lhs], zero_extinct);
    /* After the selection every value above lhs is >= a[lhs]: the next order statistic is their minimum. */
    double next = a[lhs + 1];
    for (size_t i = lhs + 2; i < n; i++)
        next = a[i] < next ? a[i] : next;
    return (1 - delta) * abundance_of(a[lhs], zero_extinct) + delta * abundance_of(next, zero_extinct);
}

static void record_bands(tf_projection *p, workspace *w, size_t t)
{
    size_t R = p->n_runs;
    memcpy(w->scratch, w->x, R * sizeof *w->scratch);
    for (int b = 0; b < TF_BAND_COUNT; b++)
        p->bands[t * TF_BAND_COUNT + (size_t)b] = quantile_exp(w->scratch, R, band_levels[b], p->zero_extinct);
}

static void record_thresholds(tf_projection *p, workspace *w, size_t t)
{
    size_t R = p->n_runs, H = p->horizon;
    for (size_t k = 0; k < p->n_thresholds; k++) {
        unsigned char *hit = w->hit + k * R;
        double level = log(p->thresholds[k].value);
        size_t count = 0;
        /* Relative thresholds sit at each run's own start times the fraction. */
        if (p->first_hit) {
            unsigned short *first = p->first_hit + k * R;
            for (size_t i = 0; i < R; i++) {
                int now = w->x[i] <= (p->thresholds[k].relative ? w->x0[i] + level : level);
                if (now && !hit[i])
                    first[i] = (unsigned short)t;
                hit[i] |= now;
                count += hit[i];
            }
        } else if (p->thresholds[k].relative)
            for (size_t i = 0; i < R; i++) {
                hit[i] |= w->x[i] <= w->x0[i] + level;
                count += hit[i];
            }
        else
            for (size_t i = 0; i < R; i++) {
                hit[i] |= w->x[i] <= level;
                count += hit[i];
            }
        p->risk[k * (H + 1) + t] = (double)count / (double)R;
        if (isnan(p->median_time[k]) && 2 * count >= R)
            p->median_time[k] = (double)t;
    }
}

static void record_declines(tf_projection *p, const workspace *w, size_t wi)
{
    size_t R = p->n_runs;
    for (size_t d = 0; d < p->n_declines; d++) {
        double level = log1p(-p->declines[d]);
        size_t count = 0;
        for (size_t i = 0; i < R; i++)
            count += w->x[i] - w->x0[i] <= level;
        p->decline_prob[wi][d] = (double)count / (double)R;
    }
    if (p->change)
        for (size_t i = 0; i < R; i++)
            p->change[wi * R + i] = w->x[i] - w->x0[i];
}

/* One year for every run: x <- drift(x) + sigma z, kept within the log-abundance bounds. Returns
 * nonzero if the drift produced a non-number. */
static int step_year(workspace *w, size_t R, tf_rng *rng)
{
    tf_rng_fill_normal(rng, w->z, R);
    for (size_t b = 0; b < w->n_blocks; b++) {
        const block *bl = &w->blocks[b];
        bl->growth->drift(bl->theta, w->x + bl->start, w->x + bl->start, bl->n);
    }
    int bad = 0;
    for (size_t i = 0; i < R; i++) {
        double v = w->x[i] + w->sigma[i] * w->z[i];
        bad |= isnan(v);
        v = v > TF_PROJECT_LOG_MAX ? TF_PROJECT_LOG_MAX : v;
        v = v < TF_PROJECT_LOG_MIN ? TF_PROJECT_LOG_MIN : v;
        w->x[i] = v;
    }
    return bad;
}

/* One year for every run with management actions (tf_project_action): the share and the take,
 * then the growth (with the action's capacity when act), holding extinct runs extinct, then the
 * added log growth and the noise. The random numbers are those of step_year, one normal a run,
 * so that projections with and without actions share them. Returns nonzero on a non-number. */
static int step_year_acting(workspace *w, size_t R, tf_rng *rng, const tf_project_action *a, int act)
{
    tf_rng_fill_normal(rng, w->z, R);
    if (a->share > 0) {
        double l = log1p(-a->share);
        for (size_t i = 0; i < R; i++)
            w->x[i] += l;
    }
    tf_model_take(a->take, w->x, R);
    for (size_t i = 0; i < R; i++)
        w->gone[i] = w->x[i] <= TF_MODEL_EXTINCT_BELOW;
    for (size_t b = 0; b < w->n_blocks; b++) {
        const block *bl = &w->blocks[b];
        tf_model_drift_alive(bl->growth, act ? bl->theta_act : bl->theta, w->x + bl->start, w->x + bl->start, bl->n);
    }
    int bad = 0;
    for (size_t i = 0; i < R; i++) {
        double v = w->x[i] + a->growth + w->sigma[i] * w->z[i];
        bad |= isnan(v);
        /* Noise does not bring back a run that is gone (model/model.h). */
        v = w->gone[i] ? TF_MODEL_LOG_EXTINCT : v;
        v = v > TF_PROJECT_LOG_MAX ? TF_PROJECT_LOG_MAX : v;
        v = v < TF_PROJECT_LOG_MIN ? TF_PROJECT_LOG_MIN : v;
        w->x[i] = v;
    }
    return bad;
}

tf_status tf_project_run(const tf_project_input *inputs, size_t n_inputs, const tf_project_options *opts,
                         tf_rng *rng, tf_projection **out, tf_error *err)
{
    *out = NULL;
    tf_status st = tf_project_check_options(opts, err);
    if (st)
        return st;
    if (n_inputs == 0 || n_inputs > TF_PROJECT_MAX_INPUTS)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "%zu models to project (1..%d allowed)", n_inputs,
                            TF_PROJECT_MAX_INPUTS);
    double total_w = 0;
    size_t total_draws = 0;
    for (size_t i = 0; i < n_inputs; i++) {
        double wt = inputs[i].weight;
        if (!(wt >= 0 && isfinite(wt)))
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, NULL, "model %zu has weight %g (must be >= 0)", i + 1,
                                wt);
        if (wt == 0)
            continue;
        if ((st = check_input(&inputs[i], i, opts->start == 0, err)))
            return st;
        if (opts->action_from > 0 && has_capacity(&opts->action) && tf_project_capacity_index(inputs[i].growth) < 0)
            return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, "choose growth models with a carrying capacity",
                                "the %s model has no carrying capacity to change", inputs[i].growth->name);
        total_w += wt;
        total_draws += inputs[i].n_draws;
    }
    if (!(total_w > 0))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "every model has weight 0");

    size_t R = opts->n_runs;
    if (R == 0)
        R = total_draws > TF_PROJECT_DEFAULT_RUNS ? total_draws : TF_PROJECT_DEFAULT_RUNS;
    if (R > MAX_RUNS)
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "pass fewer runs", "%zu runs is more than the %u allowed", R,
                            MAX_RUNS);
    size_t H = opts->horizon, K = opts->n_thresholds;

    workspace w = {0};
    tf_projection *p = calloc(1, sizeof *p);
    if (!p)
        goto nomem;
    p->horizon = H;
    p->n_runs = R;
    p->n_inputs = n_inputs;
    p->n_thresholds = K;
    memcpy(p->thresholds, opts->thresholds, K * sizeof *p->thresholds);
    for (size_t k = 0; k < K; k++)
        p->median_time[k] = NAN;
    p->n_declines = opts->n_declines;
    memcpy(p->declines, opts->declines, p->n_declines * sizeof *p->declines);
    p->windows[p->n_windows++] = TF_PROJECT_BASE_WINDOW;
    if (opts->decline_window && opts->decline_window != TF_PROJECT_BASE_WINDOW)
        p->windows[p->n_windows++] = opts->decline_window;
    size_t T = H;
    for (size_t i = 0; i < p->n_windows; i++)
        T = p->windows[i] > T ? p->windows[i] : T;

    p->input_runs = calloc(n_inputs, sizeof *p->input_runs);
    p->bands = calloc((H + 1) * TF_BAND_COUNT, sizeof *p->bands);
    p->risk = calloc(K * (H + 1) + 1, sizeof *p->risk);
    if (!p->input_runs || !p->bands || !p->risk)
        goto nomem;
    share_runs(inputs, n_inputs, total_w, R, p->input_runs);

    size_t n_blocks = 0;
    for (size_t i = 0; i < n_inputs; i++)
        n_blocks += p->input_runs[i] < inputs[i].n_draws ? p->input_runs[i] : inputs[i].n_draws;
    w.x = malloc(R * sizeof *w.x);
    w.x0 = malloc(R * sizeof *w.x0);
    w.sigma = malloc(R * sizeof *w.sigma);
    w.z = malloc(R * sizeof *w.z);
    w.scratch = malloc(R * sizeof *w.scratch);
    w.hit = calloc(K * R + 1, 1);
    w.blocks = malloc(n_blocks * sizeof *w.blocks);
    if (!w.x || !w.x0 || !w.sigma || !w.z || !w.scratch || !w.hit || !w.blocks)
        goto nomem;
    int acting = acts(opts);
    p->zero_extinct = acting;
    if (acting && !(w.gone = malloc(R)))
        goto nomem;
    if (acting && opts->action_from > 0 && has_capacity(&opts->action) &&
        !(w.theta_act = malloc(n_blocks * TF_MAX_PARAMS * sizeof *w.theta_act)))
        goto nomem;
    if (opts->keep_runs) {
        p->first_hit = malloc((K * R + 1) * sizeof *p->first_hit);
        p->change = malloc(p->n_windows * R * sizeof *p->change);
        if (!p->first_hit || !p->change)
            goto nomem;
        for (size_t i = 0; i < K * R; i++)
            p->first_hit[i] = NEVER_HIT;
    }
    lay_out_runs(inputs, n_inputs, p->input_runs, opts->start > 0 ? log(opts->start) : NAN, opts->action.capacity,
                 &w);
    memcpy(w.x, w.x0, R * sizeof *w.x);

    record_bands(p, &w, 0);
    record_thresholds(p, &w, 0);
    for (size_t t = 1; t <= T; t++) {
        if (opts->stop && *opts->stop) {
            st = tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "projection interrupted in year %zu", t);
            goto fail;
        }
        int act = opts->action_from > 0 && t >= opts->action_from;
        if (acting ? step_year_acting(&w, R, rng, act ? &opts->action : &opts->status_quo, act) : step_year(&w, R, rng)) {
            st = tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0, NULL,
                              "the growth model's drift gave a non-number in projection year %zu", t);
            goto fail;
        }
        if (t <= H) {
            record_bands(p, &w, t);
            record_thresholds(p, &w, t);
        }
        for (size_t wi = 0; wi < p->n_windows; wi++)
            if (p->windows[wi] == t)
                record_declines(p, &w, wi);
    }
    workspace_free(&w);
    *out = p;
    return TF_OK;

nomem:
    st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for a projection of %zu runs", R);
fail:
    workspace_free(&w);
    tf_projection_free(p);
    return st;
}

/* ---- accessors --------------------------------------------------------------------------------- */

size_t tf_projection_horizon(const tf_projection *p) { return p->horizon; }
size_t tf_projection_n_runs(const tf_projection *p) { return p->n_runs; }
size_t tf_projection_n_inputs(const tf_projection *p) { return p->n_inputs; }

size_t tf_projection_input_runs(const tf_projection *p, size_t i)
{
    return i < p->n_inputs ? p->input_runs[i] : 0;
}

double tf_projection_band(const tf_projection *p, size_t t, tf_band b)
{
    if (t > p->horizon || (unsigned)b >= TF_BAND_COUNT)
        return NAN;
    return p->bands[t * TF_BAND_COUNT + (size_t)b];
}

size_t tf_projection_n_thresholds(const tf_projection *p) { return p->n_thresholds; }

tf_threshold tf_projection_threshold(const tf_projection *p, size_t k)
{
    return k < p->n_thresholds ? p->thresholds[k] : (tf_threshold){NAN, 0};
}

double tf_projection_risk(const tf_projection *p, size_t k, size_t t)
{
    if (k >= p->n_thresholds || t > p->horizon)
        return NAN;
    return p->risk[k * (p->horizon + 1) + t];
}

double tf_projection_risk_se(const tf_projection *p, size_t k, size_t t)
{
    return tf_project_se(tf_projection_risk(p, k, t), p->n_runs);
}

double tf_projection_median_time(const tf_projection *p, size_t k)
{
    return k < p->n_thresholds ? p->median_time[k] : NAN;
}

size_t tf_projection_n_windows(const tf_projection *p) { return p->n_windows; }

size_t tf_projection_window(const tf_projection *p, size_t w)
{
    return w < p->n_windows ? p->windows[w] : 0;
}

size_t tf_projection_n_declines(const tf_projection *p) { return p->n_declines; }

double tf_projection_decline(const tf_projection *p, size_t d)
{
    return d < p->n_declines ? p->declines[d] : NAN;
}

double tf_projection_decline_prob(const tf_projection *p, size_t w, size_t d)
{
    if (w >= p->n_windows || d >= p->n_declines)
        return NAN;
    return p->decline_prob[w][d];
}

double tf_projection_decline_se(const tf_projection *p, size_t w, size_t d)
{
    return tf_project_se(tf_projection_decline_prob(p, w, d), p->n_runs);
}

void tf_project_stream(tf_rng *rng, uint64_t seed, const char *population)
{
    uint64_t keys[2] = {tf_rng_key("projection"), tf_rng_key(population)};
    tf_rng_derive(rng, seed, keys, 2);
}

size_t tf_projection_run_first_hit(const tf_projection *p, size_t k, size_t i)
{
    if (!p->first_hit || k >= p->n_thresholds || i >= p->n_runs)
        return TF_PROJECTION_NEVER;
    unsigned short t = p->first_hit[k * p->n_runs + i];
    return t == NEVER_HIT ? TF_PROJECTION_NEVER : t;
}

static tf_status paired(const tf_projection *a, const tf_projection *b, tf_error *err)
{
    if (!a->first_hit || !b->first_hit || a->n_runs != b->n_runs || a->n_thresholds != b->n_thresholds ||
        a->n_windows != b->n_windows || a->horizon != b->horizon)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "paired differences need two projections of the same runs, kept run by run");
    return TF_OK;
}

/* Mean and standard error of the mean of per-run differences with sum s1 and sum of squares s2
 * over n runs, as the binomial error tf_project_se is: the variance over n, not n - 1. */
static void mean_se(double s1, double s2, size_t n, double *mean, double *se)
{
    double m = s1 / (double)n, v = s2 / (double)n - m * m;
    *mean = m;
    *se = sqrt((v > 0 ? v : 0) / (double)n);
}

tf_status tf_projection_risk_difference(const tf_projection *a, const tf_projection *b, size_t k, size_t t,
                                        double *diff, double *mcse, tf_error *err)
{
    *diff = *mcse = NAN;
    tf_status st = paired(a, b, err);
    if (st)
        return st;
    if (k >= a->n_thresholds || t > a->horizon)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "no threshold %zu or year %zu", k + 1, t);
    size_t R = a->n_runs;
    const unsigned short *fa = a->first_hit + k * R, *fb = b->first_hit + k * R;
    double s1 = 0, s2 = 0;
    for (size_t i = 0; i < R; i++) {
        /* NEVER_HIT is above every year, so a run never hit never counts. */
        int d = (fa[i] <= t) - (fb[i] <= t);
        s1 += d;
        s2 += d * d;
    }
    mean_se(s1, s2, R, diff, mcse);
    return TF_OK;
}

tf_status tf_projection_decline_difference(const tf_projection *a, const tf_projection *b, size_t w, size_t d,
                                           double *diff, double *mcse, tf_error *err)
{
    *diff = *mcse = NAN;
    tf_status st = paired(a, b, err);
    if (st)
        return st;
    if (w >= a->n_windows || d >= a->n_declines || a->declines[d] != b->declines[d])
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "no window %zu or decline %zu", w + 1, d + 1);
    size_t R = a->n_runs;
    double level = log1p(-a->declines[d]), s1 = 0, s2 = 0;
    const double *ca = a->change + w * R, *cb = b->change + w * R;
    for (size_t i = 0; i < R; i++) {
        int x = (ca[i] <= level) - (cb[i] <= level);
        s1 += x;
        s2 += x * x;
    }
    mean_se(s1, s2, R, diff, mcse);
    return TF_OK;
}
