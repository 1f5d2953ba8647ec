/* The main job, population by population: the comparison (which fits every candidate), the
 * model-averaged abundance and trend, and the model-averaged projection; see analysis.h. */
#include "analysis/analysis.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "analysis/average.h"
#include "compare/pareto.h"
#include "util/stats.h"

const size_t tf_analysis_risk_years[TF_ANALYSIS_N_RISK_YEARS] = {10, 20, 50};

/* Default candidates. The theta-logistic is left out: its shape theta and growth rate trade off
 * so closely that a few decades of counts rarely tell them apart (Clark, Brook, Delean, Akcakaya
 * & Bradshaw 2010, "The theta-logistic is unreliable for modelling most census data", Methods in
 * Ecology and Evolution 1:253; recalled from memory), and its chains need several times longer
 * to converge; --model adds it. For whole counts, Poisson and negative binomial counting error
 * cover counts without and with extra variation; the rounded log-normal (lognormal-int) tells
 * little more and costs about three times as much per likelihood estimate, so --obs adds it.
 * Amounts that are not whole numbers leave only the continuous log-normal. */
static const char *const default_growth[] = {"exponential", "ricker", "gompertz"};
static const char *const default_obs_counts[] = {"poisson", "negbin"};
static const char *const default_obs_amounts[] = {"lognormal"};
/* The sampler runs by need (tf_pmmh_default_options): analyze fits every candidate, and each
 * one stops as soon as its draws pass the convergence checks, so no candidate runs longer than
 * it needs to. */
/* Quasi-extinction thresholds relative to each run's start, so that one default serves colonies
 * of tens and herds of thousands (common practice, no source). */
#define DEFAULT_THRESHOLDS "50%,20%,10%"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))

struct tf_analysis_pop {
    const tf_series *s;
    tf_comparison *cmp;
    tf_analysis_model *models;
    size_t n_models, best;
    const tf_growth_type *growth[TF_ANALYSIS_MAX_MODELS];
    double growth_prob[TF_ANALYSIS_MAX_MODELS];
    size_t n_growth, best_growth;
    tf_analysis_year *years;
    tf_analysis_trend trend, trend_recent;
    tf_projection *proj;
    tf_sensitivity *sens;
    tf_analysis_sens_row *sens_rows;
    tf_scenario_set *scenarios;
    int has_safe;
    tf_safe_removal safe;
    double status_quo;
    size_t status_quo_years;
    double seconds;
};

struct tf_analysis {
    tf_analysis_options opt;
    tf_analysis_pop *pops;
    size_t n_pops;
};

tf_status tf_analysis_options_init(tf_analysis_options *o, tf_error *err)
{
    memset(o, 0, sizeof *o);
    o->n_growth = N_OF(default_growth);
    for (size_t i = 0; i < o->n_growth; i++)
        o->growth[i] = default_growth[i];
    o->fit = tf_pmmh_default_options();
    o->evidence = tf_evidence_default_options();
    tf_project_options_init(&o->project);
    o->seed = 1;
    o->n_threads = 1;
    o->prior_sensitivity = 1;
    return tf_project_parse_thresholds(DEFAULT_THRESHOLDS, o->project.thresholds, TF_PROJECT_MAX_THRESHOLDS,
                                       &o->project.n_thresholds, err);
}

void tf_analysis_free(tf_analysis *a)
{
    if (!a)
        return;
    for (size_t i = 0; i < a->n_pops; i++) {
        tf_analysis_pop *p = &a->pops[i];
        tf_comparison_free(p->cmp);
        tf_projection_free(p->proj);
        tf_sensitivity_free(p->sens);
        free(p->sens_rows);
        tf_scenario_set_free(p->scenarios);
        free(p->models);
        free(p->years);
    }
    free(a->pops);
    free(a);
}

static double seconds_since(const struct timespec *t0)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)(t.tv_sec - t0->tv_sec) + 1e-9 * (double)(t.tv_nsec - t0->tv_nsec);
}

/* ---- progress, forwarded from the comparison's workers ---- */

typedef struct {
    tf_analysis_progress_fn fn;
    void *ctx;
    tf_analysis_event ev;   /* population fields filled in; the rest per call */
    double started[TF_COMPARE_MAX_MODELS];   /* when each candidate started, in the comparison's
                                              * seconds */
} progress_relay;

static void relay_compare(void *ctx, size_t index, const char *model_name, tf_compare_event ev, double seconds)
{
    (void)index;
    progress_relay *r = ctx;
    if (ev == TF_COMPARE_STARTED && index < TF_COMPARE_MAX_MODELS)
        r->started[index] = seconds;
    if (ev != TF_COMPARE_DONE && ev != TF_COMPARE_FAILED)
        return;
    /* The comparison calls one at a time under its lock, so the shared event is safe. */
    tf_analysis_event e = r->ev;
    e.stage = TF_ANALYSIS_MODEL_DONE;
    e.model = model_name;
    e.failed = ev == TF_COMPARE_FAILED;
    e.seconds = seconds;
    e.model_seconds = index < TF_COMPARE_MAX_MODELS ? seconds - r->started[index] : NAN;
    r->fn(r->ctx, &e);
}

static void report(progress_relay *r, tf_analysis_stage stage, double seconds)
{
    if (!r->fn)
        return;
    tf_analysis_event e = r->ev;
    e.stage = stage;
    e.seconds = seconds;
    r->fn(r->ctx, &e);
}

/* ---- model averages ---- */

/* Quantile levels of the year and trend summaries, in the order q025, q25, median, q75, q975. */
static const double levels[] = {0.025, 0.25, 0.5, 0.75, 0.975};

/* What one draw's log-abundance path gives over years first..first + n - 1. */
typedef double draw_value(const double *path, size_t first, size_t n);

static double log_abundance(const double *path, size_t first, size_t n)
{
    (void)n;
    return path[first];
}

/* The least-squares change per year (tf_stats_slope), as a proportion. */
static double change_per_year(const double *path, size_t first, size_t n)
{
    return expm1(tf_stats_slope(path + first, n, 1));
}

/* value of every draw of every model with a probability, weighted by prob_m / n_draws_m, into
 * pts (room for every such draw); returns how many. */
static size_t weigh_draws(const tf_analysis_pop *p, draw_value *value, size_t first, size_t n,
                          tf_average_point *pts)
{
    size_t ny = tf_series_n_years(p->s), k = 0;
    for (size_t i = 0; i < p->n_models; i++) {
        const tf_analysis_model *m = &p->models[i];
        if (!(m->probability > 0))
            continue;
        size_t nd = tf_fit_n_draws(m->fit);
        const double *paths = tf_fit_paths(m->fit);
        double w = m->probability / (double)nd;
        for (size_t d = 0; d < nd; d++)
            pts[k++] = (tf_average_point){value(paths + d * ny, first, n), w};
    }
    return k;
}

/* The model-averaged trend over years first..first + n - 1 into out; pts has room for every
 * draw. */
static void average_trend(const tf_analysis_pop *p, tf_average_point *pts, size_t first, size_t n,
                          tf_analysis_trend *out)
{
    size_t k = weigh_draws(p, change_per_year, first, n, pts);
    out->first_year = tf_series_first_year(p->s) + (int)first;
    out->last_year = out->first_year + (int)n - 1;
    tf_average_moments(pts, k, &out->mean, &out->p_decline);
    double q[N_OF(levels)];
    tf_average_quantiles(pts, k, levels, N_OF(levels), q);
    out->q025 = q[0];
    out->median = q[2];
    out->q975 = q[4];
}

/* Fills p->years and the trends from the paths of the fitted models, each draw of model m
 * weighted by prob_m / n_draws_m. */
static tf_status average(tf_analysis_pop *p, size_t recent_years, tf_error *err)
{
    size_t ny = tf_series_n_years(p->s), total = 0;
    for (size_t i = 0; i < p->n_models; i++)
        if (p->models[i].probability > 0)
            total += tf_fit_n_draws(p->models[i].fit);
    p->years = calloc(ny, sizeof *p->years);
    tf_average_point *pts = malloc((total ? total : 1) * sizeof *pts);
    if (!p->years || !pts) {
        free(pts);
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory averaging the models");
    }
    const double *y = tf_series_counts(p->s), *e = tf_series_effort(p->s);
    for (size_t t = 0; t < ny; t++) {
        size_t k = weigh_draws(p, log_abundance, t, 1, pts);
        /* Quantiles of x, then exp: the same order as the fit's own year summaries. */
        double q[N_OF(levels)];
        tf_average_quantiles(pts, k, levels, N_OF(levels), q);
        tf_analysis_year *ys = &p->years[t];
        ys->year = tf_series_first_year(p->s) + (int)t;
        ys->count = y[t];
        ys->effort = e[t];
        ys->q025 = exp(q[0]);
        ys->q25 = exp(q[1]);
        ys->median = exp(q[2]);
        ys->q75 = exp(q[3]);
        ys->q975 = exp(q[4]);
    }
    size_t recent = recent_years ? recent_years : TF_FIT_RECENT_YEARS;
    if (recent > ny)
        recent = ny;
    average_trend(p, pts, 0, ny, &p->trend);
    average_trend(p, pts, ny - recent, recent, &p->trend_recent);
    free(pts);
    return TF_OK;
}

/* ---- one population ---- */

/* The projection options of population s: o's, with the status quo's removals (the mean net
 * removal of the survey's last years, tf_scenario_status_quo_animals) taken every year. */
static tf_project_options project_options(const tf_series *s, const tf_analysis_options *o,
                                          const volatile sig_atomic_t *stop)
{
    tf_project_options po = o->project;
    po.stop = stop;
    po.status_quo.take = tf_series_counted_fraction(s) * tf_scenario_status_quo_animals(s, NULL);
    return po;
}

static tf_status project(tf_analysis_pop *p, const tf_analysis_options *o, const volatile sig_atomic_t *stop,
                         tf_error *err)
{
    tf_project_input in[TF_ANALYSIS_MAX_MODELS];
    double *starts[TF_ANALYSIS_MAX_MODELS] = {0};
    size_t n_in = 0, ny = tf_series_n_years(p->s);
    tf_status st = TF_OK;
    for (size_t i = 0; i < p->n_models && n_in < TF_PROJECT_MAX_INPUTS; i++) {
        const tf_analysis_model *m = &p->models[i];
        if (!(m->probability > 0))
            continue;
        size_t nd = tf_fit_n_draws(m->fit);
        if (!(starts[n_in] = malloc(nd * sizeof(double)))) {
            st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for the projection");
            goto done;
        }
        tf_fit_year_draws(m->fit, ny - 1, starts[n_in]);
        in[n_in] = (tf_project_input){
            .growth = m->growth,
            .sigma_index = tf_model_sigma_index(tf_fit_model(m->fit)),
            .n_params = tf_fit_n_params(m->fit),
            .n_draws = nd,
            .draws = tf_fit_draws(m->fit),
            .x_last = starts[n_in],
            .weight = m->probability,
        };
        n_in++;
    }
    tf_project_options po = project_options(p->s, o, stop);
    double q = tf_series_counted_fraction(p->s);
    p->status_quo = tf_scenario_status_quo_animals(p->s, &p->status_quo_years);
    /* Its own stream, keyed by the population: the same futures alone or among others. The
     * scenarios and the safe removal start from the same state (common random numbers). */
    tf_rng rng, start;
    tf_project_stream(&rng, o->seed, tf_series_label(p->s));
    start = rng;
    st = tf_project_run(in, n_in, &po, &rng, &p->proj, err);
    int year0 = tf_series_first_year(p->s) + (int)ny - 1;
    if (st == TF_OK && o->n_scenarios)
        st = tf_scenario_set_run(in, n_in, &po, &start, o->scenarios, o->n_scenarios, year0, q, &p->scenarios, err);
    if (st == TF_OK && o->safe.years > 0) {
        st = tf_safe_removal_find(in, n_in, &po, &start, &o->safe, q, &p->safe, err);
        p->has_safe = st == TF_OK;
    }
done:
    for (size_t i = 0; i < TF_ANALYSIS_MAX_MODELS; i++)
        free(starts[i]);
    return st;
}

/* ---- the prior sensitivity ---- */

/* Systematic resampling (Kitagawa 1996, J. Comput. Graph. Stat. 5:1) of n draws with log weights
 * lw into idx[0..n), with the fixed offset 1/2: no random numbers, so a row's projection differs
 * from another's by its weights alone. */
static void resample(const double *lw, size_t n, size_t *idx)
{
    double top = -INFINITY, sum = 0;
    for (size_t d = 0; d < n; d++)
        top = fmax(top, lw[d]);
    for (size_t d = 0; d < n; d++)
        sum += exp(lw[d] - top);
    double step = sum / (double)n, u = 0.5 * step, acc = 0;
    size_t d = 0;
    for (size_t k = 0; k < n; k++) {
        double target = u + (double)k * step;
        while (d + 1 < n && acc + exp(lw[d] - top) < target)
            acc += exp(lw[d++] - top);
        idx[k] = d;
    }
}

/* The risks of row row of the sensitivity into out. */
static tf_status sensitivity_risks(tf_analysis_pop *p, const tf_analysis_options *o, size_t row,
                                   const volatile sig_atomic_t *stop, tf_analysis_sens_row *out, tf_error *err)
{
    size_t ny = tf_series_n_years(p->s), n_in = 0;
    tf_project_input in[TF_ANALYSIS_MAX_MODELS];
    double *mem[TF_ANALYSIS_MAX_MODELS] = {0};
    tf_status st = TF_OK;
    out->reliable = 1;
    for (size_t i = 0; i < TF_ANALYSIS_MAX_MODELS; i++)
        out->draws_k[i] = NAN;
    for (size_t k = 0; k < TF_PROJECT_MAX_THRESHOLDS; k++)
        for (size_t y = 0; y < TF_ANALYSIS_N_RISK_YEARS; y++)
            out->risk[k][y] = NAN;
    for (size_t i = 0; i < p->n_models && n_in < TF_PROJECT_MAX_INPUTS; i++) {
        const tf_analysis_model *m = &p->models[i];
        double prob = tf_sensitivity_cell(p->sens, row, i)->prob;
        if (!m->fit || !(prob > 0))
            continue;
        size_t nd = tf_fit_n_draws(m->fit), np = tf_fit_n_params(m->fit);
        /* One block for what the projection borrows (the resampled draws and their starts); the
         * weights, the fit's starts and the resampled indices are freed below. */
        double *block = malloc(nd * (np + 1) * sizeof(double));
        double *lw = malloc(nd * sizeof *lw), *x_last = malloc(nd * sizeof *x_last);
        size_t *idx = malloc(nd * sizeof *idx);
        mem[n_in] = block;
        if (!block || !lw || !x_last || !idx) {
            free(lw);
            free(x_last);
            free(idx);
            st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for the prior sensitivity");
            goto done;
        }
        double *draws = block, *starts = block + nd * np;
        const double *all = tf_fit_draws(m->fit);
        tf_fit_year_draws(m->fit, ny - 1, x_last);
        int changed = tf_sensitivity_cell(p->sens, row, i)->changed;
        for (size_t d = 0; d < nd; d++)
            lw[d] = changed ? tf_sensitivity_log_ratio(p->sens, row, i, all + d * np) : 0.0;
        double top = -INFINITY;
        for (size_t d = 0; changed && d < nd; d++)
            top = fmax(top, lw[d]);
        if (changed && !(top > -INFINITY && top < INFINITY)) {
            /* The new prior rules out every draw (or only the old one is 0 there): nothing to
             * reweight, so the row's risks stand on the old draws and are flagged. */
            out->reliable = 0;
            changed = 0;
            for (size_t d = 0; d < nd; d++)
                idx[d] = d;
        }
        if (changed) {
            size_t n_tail;
            if ((st = tf_pareto_k(lw, nd, &out->draws_k[i], &n_tail, err)) != TF_OK) {
                free(lw);
                free(x_last);
                free(idx);
                goto done;
            }
            out->reliable &= out->draws_k[i] <= TF_PARETO_K_MAX;
            resample(lw, nd, idx);
        } else {
            for (size_t d = 0; d < nd; d++)
                idx[d] = d;
        }
        for (size_t d = 0; d < nd; d++) {
            memcpy(draws + d * np, all + idx[d] * np, np * sizeof *draws);
            starts[d] = x_last[idx[d]];
        }
        free(lw);
        free(x_last);
        free(idx);
        in[n_in++] = (tf_project_input){
            .growth = m->growth,
            .sigma_index = tf_model_sigma_index(tf_fit_model(m->fit)),
            .n_params = np,
            .n_draws = nd,
            .draws = draws,
            .x_last = starts,
            .weight = prob,
        };
    }
    if (n_in) {
        /* The projection of the population as the main one makes it (status quo removals
         * included), so that the fitted row gives the headline risks. */
        tf_project_options po = project_options(p->s, o, stop);
        tf_rng rng;
        tf_project_stream(&rng, o->seed, tf_series_label(p->s));
        tf_projection *pr = NULL;
        if ((st = tf_project_run(in, n_in, &po, &rng, &pr, err)) != TF_OK)
            goto done;
        for (size_t k = 0; k < tf_projection_n_thresholds(pr) && k < TF_PROJECT_MAX_THRESHOLDS; k++)
            for (size_t y = 0; y < TF_ANALYSIS_N_RISK_YEARS; y++)
                if (tf_analysis_risk_years[y] <= tf_projection_horizon(pr))
                    out->risk[k][y] = tf_projection_risk(pr, k, tf_analysis_risk_years[y]);
        tf_projection_free(pr);
    }
done:
    for (size_t i = 0; i < TF_ANALYSIS_MAX_MODELS; i++)
        free(mem[i]);
    return st;
}

static tf_status sensitivity(tf_analysis_pop *p, const tf_analysis_options *o, const volatile sig_atomic_t *stop,
                             tf_error *err)
{
    tf_sensitivity_alternative alt[TF_SENSITIVITY_MAX_ALTERNATIVES];
    size_t n_user = o->n_prior_alternatives;
    if (n_user > TF_ANALYSIS_MAX_USER_ALTERNATIVES)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "at most %d prior alternatives",
                            TF_ANALYSIS_MAX_USER_ALTERNATIVES);
    size_t n = tf_sensitivity_standard(p->cmp, alt, TF_SENSITIVITY_MAX_ALTERNATIVES - n_user);
    for (size_t a = 0; a < n_user; a++)
        alt[n++] = o->prior_alternatives[a];
    tf_sensitivity_options so = {o->prior_refit, o->evidence};
    so.evidence.seed = o->seed;
    so.evidence.n_threads = o->n_threads;
    tf_status st = tf_sensitivity_run(p->cmp, alt, n, &so, stop, &p->sens, err);
    if (st != TF_OK)
        return st;
    size_t rows = tf_sensitivity_n_rows(p->sens);
    if (!(p->sens_rows = calloc(rows, sizeof *p->sens_rows)))
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    for (size_t r = 0; r < rows && st == TF_OK; r++)
        st = sensitivity_risks(p, o, r, stop, &p->sens_rows[r], err);
    return st;
}

static void obs_names(const tf_analysis_options *o, const tf_series *s, const char *const **names, size_t *n_out);

size_t tf_analysis_candidate_obs(const tf_analysis_options *o, const tf_series *s, const char **names, size_t max)
{
    const char *const *list;
    size_t n;
    obs_names(o, s, &list, &n);
    for (size_t i = 0; i < n && i < max; i++)
        names[i] = list[i];
    return n < max ? n : max;
}

/* The counting-error names for series s under the options; *n_out = 0 means let the comparison
 * choose every suitable one. */
static void obs_names(const tf_analysis_options *o, const tf_series *s, const char *const **names, size_t *n_out)
{
    if (o->estimates && !o->n_obs) {
        *names = default_obs_amounts;
        *n_out = N_OF(default_obs_amounts);
    } else if (o->obs_auto) {
        *names = NULL;
        *n_out = 0;
    } else if (o->n_obs) {
        *names = o->obs;
        *n_out = o->n_obs;
    } else if (tf_series_first_fractional(s) == tf_series_n_years(s)) {
        *names = default_obs_counts;
        *n_out = N_OF(default_obs_counts);
    } else {
        *names = default_obs_amounts;
        *n_out = N_OF(default_obs_amounts);
    }
}

static tf_status run_population(tf_analysis_pop *p, const tf_analysis_options *o, const volatile sig_atomic_t *stop,
                                progress_relay *relay, tf_error *err)
{
    struct timespec t0;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    report(relay, TF_ANALYSIS_STARTED, 0);
    tf_compare_options co = tf_compare_default_options();
    co.growth = o->n_growth ? o->growth : NULL;
    co.n_growth = o->n_growth;
    obs_names(o, p->s, &co.obs, &co.n_obs);
    co.fit = o->fit;
    co.fit.seed = o->seed;
    co.evidence = o->evidence;
    co.evidence.seed = o->seed;
    co.n_threads = o->n_threads;
    co.priors = o->priors;
    co.priors_ctx = o->priors_ctx;
    co.weight_names = o->weight_names;
    co.weights = o->weights;
    co.n_weights = o->n_weights;
    if (relay->fn) {
        co.progress = relay_compare;
        co.progress_ctx = relay;
    }
    const char *label = tf_series_label(p->s);
    tf_status st = tf_compare_run(p->s, &co, stop, &p->cmp, err);
    if (st != TF_OK) {
        if (st != TF_ERR_INTERRUPTED && label[0])
            tf_error_add(err, st, NULL, 0, 0, NULL, "population '%s' could not be analysed", label);
        return st;
    }
    size_t n = tf_comparison_n_models(p->cmp);
    p->models = calloc(n ? n : 1, sizeof *p->models);
    if (!p->models)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    p->n_models = n;
    for (size_t i = 0; i < n; i++) {
        tf_analysis_model *m = &p->models[i];
        m->name = tf_comparison_name(p->cmp, i);
        m->growth = tf_comparison_growth(p->cmp, i);
        m->obs = tf_comparison_obs(p->cmp, i);
        m->state = tf_comparison_state(p->cmp, i);
        m->note = tf_comparison_note(p->cmp, i);
        if (m->state == TF_CANDIDATE_FITTED) {
            m->fit = tf_comparison_fit(p->cmp, i);
            m->evidence = tf_comparison_evidence(p->cmp, i);
            double prob = tf_comparison_figures(p->cmp, i)->prob;
            m->probability = isfinite(prob) && prob > 0 ? prob : 0;
        }
    }
    p->best = tf_comparison_best(p->cmp);
    if (p->best >= n) {
        char where[160] = "", why[320] = "";
        if (label[0])
            snprintf(where, sizeof where, " of population '%s'", label);
        /* The first failed candidate's note: a batch reports this one message per population. */
        for (size_t i = 0; i < n && !why[0]; i++)
            if (p->models[i].state == TF_CANDIDATE_FAILED && p->models[i].note[0])
                snprintf(why, sizeof why, " (%s: %s)", p->models[i].name, p->models[i].note);
        return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0, "see the notes of 'tallyfit compare' on the same file",
                            "no candidate model%s could be fitted%s", where, why);
    }
    /* The best by probability equals the best by evidence under equal prior weights; read it
     * from the probabilities so that it stays right if weights are ever given. */
    for (size_t i = 0; i < n; i++)
        if (p->models[i].probability > p->models[p->best].probability)
            p->best = i;
    for (size_t i = 0; i < n; i++) {
        const tf_analysis_model *m = &p->models[i];
        if (m->state == TF_CANDIDATE_EXCLUDED)
            continue;
        size_t g = 0;
        while (g < p->n_growth && p->growth[g] != m->growth)
            g++;
        if (g == p->n_growth)
            p->growth[p->n_growth++] = m->growth;
        p->growth_prob[g] += m->probability;
    }
    for (size_t g = 1; g < p->n_growth; g++)
        if (p->growth_prob[g] > p->growth_prob[p->best_growth])
            p->best_growth = g;
    if ((st = average(p, o->fit.recent_years, err)) != TF_OK)
        return st;
    report(relay, TF_ANALYSIS_PROJECTING, seconds_since(&t0));
    if ((st = project(p, o, stop, err)) != TF_OK)
        return st;
    if (o->prior_sensitivity && (st = sensitivity(p, o, stop, err)) != TF_OK)
        return st;
    p->seconds = seconds_since(&t0);
    report(relay, TF_ANALYSIS_DONE, p->seconds);
    return TF_OK;
}

tf_status tf_analysis_run(const tf_survey *sv, const tf_analysis_options *options, const volatile sig_atomic_t *stop,
                          tf_analysis_progress_fn progress, void *progress_ctx, tf_analysis **out, tf_error *err)
{
    *out = NULL;
    if (!options->priors || options->n_threads < 1)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "analysis: no priors callback or no thread");
    const tf_series *only = NULL;
    if (options->population && !(only = tf_survey_find(sv, options->population)))
        return tf_error_add(err, TF_ERR_USAGE, tf_survey_path(sv), 0, 0,
                            "run 'tallyfit check' on the file to list its populations", "no population named '%s'",
                            options->population);
    tf_analysis *a = calloc(1, sizeof *a);
    size_t n = only ? 1 : tf_survey_n_series(sv);
    if (!a || !(a->pops = calloc(n, sizeof *a->pops))) {
        free(a);
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    }
    a->opt = *options;
    a->n_pops = n;
    tf_status st = tf_analysis_check_management(sv, only, options, err);
    for (size_t i = 0; i < n && st == TF_OK; i++) {
        tf_analysis_pop *p = &a->pops[i];
        p->s = only ? only : tf_survey_series(sv, i);
        progress_relay relay = {.fn = progress, .ctx = progress_ctx,
                                .ev = {.population = i, .n_populations = n, .label = tf_series_label(p->s)}};
        st = run_population(p, options, stop, &relay, err);
    }
    if (st != TF_OK) {
        tf_analysis_free(a);
        return st;
    }
    *out = a;
    return TF_OK;
}

const tf_analysis_options *tf_analysis_options_of(const tf_analysis *a) { return &a->opt; }
size_t tf_analysis_n_populations(const tf_analysis *a) { return a->n_pops; }
const tf_analysis_pop *tf_analysis_population(const tf_analysis *a, size_t i) { return i < a->n_pops ? &a->pops[i] : NULL; }

const tf_series *tf_analysis_pop_series(const tf_analysis_pop *p) { return p->s; }
const tf_comparison *tf_analysis_pop_comparison(const tf_analysis_pop *p) { return p->cmp; }
size_t tf_analysis_pop_n_models(const tf_analysis_pop *p) { return p->n_models; }
const tf_analysis_model *tf_analysis_pop_model(const tf_analysis_pop *p, size_t i) { return &p->models[i]; }
void tf_analysis_pop_by_probability(const tf_analysis_pop *p, size_t *order)
{
    /* An insertion sort: a few dozen candidates at most, and stable. */
    size_t n = tf_analysis_pop_n_models(p);
    for (size_t i = 0; i < n; i++) {
        size_t k = i;
        double pi = tf_analysis_pop_model(p, i)->probability;
        while (k > 0 && tf_analysis_pop_model(p, order[k - 1])->probability < pi) {
            order[k] = order[k - 1];
            k--;
        }
        order[k] = i;
    }
}

size_t tf_analysis_pop_best(const tf_analysis_pop *p) { return p->best; }
size_t tf_analysis_pop_n_growth(const tf_analysis_pop *p) { return p->n_growth; }
const tf_growth_type *tf_analysis_pop_growth(const tf_analysis_pop *p, size_t i) { return p->growth[i]; }
double tf_analysis_pop_growth_probability(const tf_analysis_pop *p, size_t i) { return p->growth_prob[i]; }
size_t tf_analysis_pop_best_growth(const tf_analysis_pop *p) { return p->best_growth; }
const tf_analysis_year *tf_analysis_pop_year(const tf_analysis_pop *p, size_t i) { return &p->years[i]; }
const tf_analysis_trend *tf_analysis_pop_trend(const tf_analysis_pop *p) { return &p->trend; }

int tf_analysis_growth_levels_off(const tf_growth_type *g)
{
    for (size_t k = 0; k < g->n_params; k++)
        if (!strcmp(g->param_names[k], "K"))
            return 1;
    return 0;
}
const tf_analysis_trend *tf_analysis_pop_trend_recent(const tf_analysis_pop *p) { return &p->trend_recent; }
const tf_projection *tf_analysis_pop_projection(const tf_analysis_pop *p) { return p->proj; }
double tf_analysis_pop_seconds(const tf_analysis_pop *p) { return p->seconds; }
const tf_sensitivity *tf_analysis_pop_sensitivity(const tf_analysis_pop *p) { return p->sens; }
const tf_analysis_sens_row *tf_analysis_pop_sens_row(const tf_analysis_pop *p, size_t row)
{
    return p->sens_rows && row < tf_sensitivity_n_rows(p->sens) ? &p->sens_rows[row] : NULL;
}

const tf_scenario_set *tf_analysis_pop_scenarios(const tf_analysis_pop *p) { return p->scenarios; }
const tf_safe_removal *tf_analysis_pop_safe_removal(const tf_analysis_pop *p) { return p->has_safe ? &p->safe : NULL; }

double tf_analysis_pop_status_quo(const tf_analysis_pop *p, size_t *n_years)
{
    if (n_years)
        *n_years = p->status_quo_years;
    return p->status_quo;
}

tf_status tf_analysis_check_management(const tf_survey *sv, const tf_series *only, const tf_analysis_options *o,
                                       tf_error *err)
{
    tf_status st;
    if (o->safe.years > 0 && o->project.n_thresholds == 0)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give a threshold with --threshold",
                            "the largest safe removal needs a quasi-extinction threshold");
    if (o->safe.years > o->project.horizon)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                            "ask within the projected years, or project further with --years",
                            "--safe-removal: %zu years is beyond the %zu projected years", o->safe.years,
                            o->project.horizon);
    if (o->n_scenarios == 0)
        return TF_OK;
    if ((st = tf_scenario_check_list(o->scenarios, o->n_scenarios, err)) != TF_OK)
        return st;
    size_t n_growth = o->n_growth ? o->n_growth : tf_model_n_growth();
    for (size_t i = 0; i < n_growth; i++) {
        const tf_growth_type *g = o->n_growth ? tf_model_find_growth(o->growth[i]) : tf_model_growth_at(i);
        if (g && (st = tf_scenario_check_model(o->scenarios, o->n_scenarios, g, err)) != TF_OK)
            return st;
    }
    size_t n = only ? 1 : sv ? tf_survey_n_series(sv) : 0;
    for (size_t i = 0; i < n; i++) {
        const tf_series *s = only ? only : tf_survey_series(sv, i);
        int year0 = tf_series_first_year(s) + (int)tf_series_n_years(s) - 1;
        if ((st = tf_scenario_check_years(o->scenarios, o->n_scenarios, year0, o->project.horizon, err)) != TF_OK)
            return st;
    }
    return TF_OK;
}
