/* Model comparison of one population: candidates, fits and evidence in parallel, Bayes factors
 * and posterior model probabilities. */
#include "compare/compare.h"

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "compare/pareto.h"

#define MAX_THREADS 256

typedef struct {
    char name[96];
    const tf_growth_type *g;
    const tf_obs_type *o;
    tf_candidate_state state;
    char note[512];
    tf_model *m;
    tf_prior_set *priors;
    tf_posterior *post;
    tf_fit *fit;
    tf_evidence ev;
    tf_evidence_draws *kept;  /* the evidence's importance draws, for other priors */
    tf_candidate_figures fig;
    double weight;           /* unnormalised prior weight */
    int interrupted;
} entry;

struct tf_comparison {
    const tf_series *s;
    tf_compare_scale scale;
    size_t n;
    entry *e;
    size_t best, n_fitted;
};

tf_compare_options tf_compare_default_options(void)
{
    tf_compare_options o;
    memset(&o, 0, sizeof o);
    o.fit = tf_pmmh_default_options();
    o.evidence = tf_evidence_default_options();
    o.n_threads = 1;
    return o;
}

void tf_comparison_free(tf_comparison *c)
{
    if (!c)
        return;
    for (size_t i = 0; i < c->n; i++) {
        entry *e = &c->e[i];
        tf_fit_free(e->fit);
        tf_evidence_draws_free(e->kept);
        tf_posterior_free(e->post);
        tf_prior_set_free(e->priors);
        tf_model_free(e->m);
    }
    free(c->e);
    free(c);
}

/* ---- the arithmetic ---- */

void tf_compare_probabilities(const double *l, const double *se, const double *w, size_t n, double *prob,
                              double *prob_se)
{
    double top = -INFINITY, wsum = 0;
    for (size_t i = 0; i < n; i++) {
        if (l[i] > top)
            top = l[i];
        wsum += w ? w[i] : 1.0;
    }
    double s = 0;
    for (size_t i = 0; i < n; i++) {
        prob[i] = (w ? w[i] / wsum : 1.0 / (double)n) * exp(l[i] - top);
        s += prob[i];
    }
    for (size_t i = 0; i < n; i++)
        prob[i] /= s;
    if (!prob_se)
        return;
    /* sum_j p_j^2 se_j^2 once, then each term leaves out its own j = i part. */
    double q = 0;
    for (size_t j = 0; j < n; j++)
        q += prob[j] * prob[j] * se[j] * se[j];
    for (size_t i = 0; i < n; i++) {
        double pi = prob[i], own = (1.0 - pi) * (1.0 - pi) * se[i] * se[i];
        double others = q - pi * pi * se[i] * se[i];
        double v = pi * pi * (own + (others > 0 ? others : 0));
        prob_se[i] = sqrt(v);
    }
}

const char *tf_compare_kass_raftery(double two_ln_b)
{
    if (!(two_ln_b >= 0))
        return "";
    if (two_ln_b < 2)
        return "not worth more than a bare mention";
    if (two_ln_b < 6)
        return "positive";
    if (two_ln_b < 10)
        return "strong";
    return "very strong";
}

/* ---- candidates ---- */

/* Why series s does not suit observation model o ("" when it does). */
static void unsuited_reason(const tf_series *s, const tf_obs_type *o, char *buf, size_t size)
{
    int zero;
    size_t i = tf_model_obs_unsuited(o, s, &zero);
    int year = tf_series_first_year(s) + (int)i;
    buf[0] = '\0';
    if (i == tf_series_n_years(s))
        return;
    if (zero)
        snprintf(buf, size, "the count of 0 in %d is impossible under %s counting error", year, o->label);
    else
        snprintf(buf, size, "count %g in %d is not a whole number, which %s counting error needs",
                 tf_series_counts(s)[i], year, o->label);
}

static tf_status add_names(tf_error *err, const char *what, const char *const *names, size_t n, size_t n_known,
                           const void *(*find)(const char *), const void *(*at)(size_t), const void **out,
                           size_t *n_out, void (*list)(char *, size_t))
{
    *n_out = 0;
    if (n == 0) {
        for (size_t i = 0; i < n_known; i++)
            out[(*n_out)++] = at(i);
        return TF_OK;
    }
    for (size_t i = 0; i < n; i++) {
        const void *p = find(names[i]);
        if (!p) {
            char known[256], hint[300];
            list(known, sizeof known);
            snprintf(hint, sizeof hint, "known %s models: %s", what, known);
            return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, hint, "unknown %s model '%s'", what, names[i]);
        }
        for (size_t j = 0; j < *n_out; j++)
            if (out[j] == p)
                return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "the %s model '%s' is named twice", what,
                                    names[i]);
        if (*n_out >= TF_COMPARE_MAX_MODELS)
            return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "too many %s models", what);
        out[(*n_out)++] = p;
    }
    return TF_OK;
}

static const void *find_growth(const char *name) { return tf_model_find_growth(name); }
static const void *find_obs(const char *name) { return tf_model_find_obs(name); }
static const void *growth_at(size_t i) { return tf_model_growth_at(i); }
static const void *obs_at(size_t i) { return tf_model_obs_at(i); }

/* Lays out growth x obs candidates and settles which are excluded and the comparison's scale. */
static tf_status build_candidates(tf_comparison *c, const tf_compare_options *opt, tf_error *err)
{
    const void *gs[TF_COMPARE_MAX_MODELS], *os[TF_COMPARE_MAX_MODELS];
    size_t n_g, n_o;
    tf_status st = add_names(err, "growth", opt->growth, opt->n_growth, tf_model_n_growth(), find_growth, growth_at,
                             gs, &n_g, tf_model_list_growth);
    if (st == TF_OK)
        st = add_names(err, "observation", opt->obs, opt->n_obs, tf_model_n_obs(), find_obs, obs_at, os, &n_o,
                       tf_model_list_obs);
    if (st != TF_OK)
        return st;
    if (n_g * n_o > TF_COMPARE_MAX_MODELS)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "too many candidate models (%zu)", n_g * n_o);
    c->e = calloc(n_g * n_o, sizeof *c->e);
    if (!c->e)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    c->n = n_g * n_o;

    /* Which observation models suit the counts, and of those, whether any is a probability of
     * whole counts (needs_integer: Poisson, negative binomial, rounded log-normal) or a density
     * of a continuous amount (the log-normal). */
    int suits[TF_COMPARE_MAX_MODELS], any_count = 0, any_density = 0;
    char reason[TF_COMPARE_MAX_MODELS][256];
    for (size_t k = 0; k < n_o; k++) {
        const tf_obs_type *o = os[k];
        unsuited_reason(c->s, o, reason[k], sizeof reason[k]);
        suits[k] = reason[k][0] == '\0';
        if (suits[k]) {
            any_count |= o->needs_integer;
            any_density |= !o->needs_integer;
        }
    }
    if (any_count && any_density) {
        if (opt->n_obs > 0) {
            char dens[200] = "", cnt[200] = "";
            for (size_t k = 0; k < n_o; k++) {
                const tf_obs_type *o = os[k];
                if (!suits[k])
                    continue;
                char *b = o->needs_integer ? cnt : dens;
                size_t len = strlen(b);
                snprintf(b + len, 200 - len, "%s%s", len ? ", " : "", o->name);
            }
            return tf_error_add(err, TF_ERR_UNSUPPORTED, NULL, 0, 0,
                                "for whole counts use lognormal-int (the log-normal rounded to whole counts) in "
                                "place of lognormal, or compare the two kinds separately",
                                "a density of a continuous amount (%s) cannot be compared with probabilities of "
                                "whole counts (%s): their marginal likelihoods are on different scales",
                                dens, cnt);
        }
        for (size_t k = 0; k < n_o; k++) {
            const tf_obs_type *o = os[k];
            if (suits[k] && !o->needs_integer) {
                suits[k] = 0;
                snprintf(reason[k], sizeof reason[k],
                         "%s is a density of a continuous amount and does not compare with the count models' "
                         "probabilities of whole counts%s",
                         o->label, tf_model_find_obs("lognormal-int") ? "; lognormal-int is the log-normal for whole "
                                                                         "counts"
                                                                       : "");
            }
        }
    }
    c->scale = any_count ? TF_COMPARE_COUNTS : TF_COMPARE_DENSITIES;
    for (size_t i = 0; i < n_g; i++)
        for (size_t k = 0; k < n_o; k++) {
            entry *e = &c->e[i * n_o + k];
            e->g = gs[i];
            e->o = os[k];
            snprintf(e->name, sizeof e->name, "%s+%s", e->g->name, e->o->name);
            e->state = suits[k] ? TF_CANDIDATE_FITTED : TF_CANDIDATE_EXCLUDED;
            snprintf(e->note, sizeof e->note, "%s", suits[k] ? "" : reason[k]);
            e->weight = 1.0;
        }
    return TF_OK;
}

/* Growth-name weights first, then full names, so that a full name wins over its growth's. */
static tf_status apply_weights(tf_comparison *c, const tf_compare_options *opt, tf_error *err)
{
    for (int pass = 0; pass < 2; pass++)
        for (size_t w = 0; w < opt->n_weights; w++) {
            const char *name = opt->weight_names[w];
            double v = opt->weights[w];
            int is_growth = tf_model_find_growth(name) != NULL;
            if (is_growth != (pass == 0))
                continue;
            if (!(v > 0 && v < INFINITY))
                return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, "weights are relative: any positive number",
                                    "the prior weight of '%s' must be a positive number, not %g", name, v);
            int hit = 0;
            for (size_t i = 0; i < c->n; i++) {
                entry *e = &c->e[i];
                if (!strcmp(is_growth ? e->g->name : e->name, name)) {
                    e->weight = v;
                    hit = 1;
                }
            }
            if (!hit)
                return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0,
                                    "name a candidate as growth+observation (e.g. ricker+poisson) or a growth model",
                                    "the prior weight for '%s' names no candidate model", name);
        }
    return TF_OK;
}

/* ---- running the candidates ---- */

typedef struct {
    tf_comparison *c;
    const tf_compare_options *opt;
    const volatile sig_atomic_t *stop;
    size_t per_model_threads;
    size_t *todo;
    size_t n_todo, next;
    pthread_mutex_t lock;
    struct timespec t0;
} run_job;

static double elapsed(const struct timespec *t0)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)(t.tv_sec - t0->tv_sec) + 1e-9 * (double)(t.tv_nsec - t0->tv_nsec);
}

static void notify(run_job *j, size_t i, tf_compare_event ev)
{
    if (!j->opt->progress)
        return;
    pthread_mutex_lock(&j->lock);
    j->opt->progress(j->opt->progress_ctx, i, j->c->e[i].name, ev, elapsed(&j->t0));
    pthread_mutex_unlock(&j->lock);
}

static void fail_note(entry *e, const char *stage, const tf_error *err)
{
    const char *what = err->n_items ? err->items[0].what : "unknown error";
    const char *hint = err->n_items ? err->items[0].hint : "";
    snprintf(e->note, sizeof e->note, "%s failed: %.300s%s%.150s%s", stage, what, hint[0] ? " (" : "", hint,
             hint[0] ? ")" : "");
    e->state = TF_CANDIDATE_FAILED;
}

static void run_one(run_job *j, size_t i)
{
    entry *e = &j->c->e[i];
    tf_error err;
    tf_error_init(&err);
    notify(j, i, TF_COMPARE_STARTED);
    tf_pmmh_options fo = j->opt->fit;
    fo.n_threads = j->per_model_threads;
    tf_status st = tf_pmmh_run(e->post, j->c->s, &fo, j->stop, NULL, NULL, &e->fit, &err);
    if (st == TF_ERR_INTERRUPTED) {
        e->interrupted = 1;
        return;
    }
    if (st != TF_OK) {
        fail_note(e, "the fit", &err);
        notify(j, i, TF_COMPARE_FAILED);
        return;
    }
    notify(j, i, TF_COMPARE_FITTED);
    tf_evidence_options eo = j->opt->evidence;
    eo.n_threads = j->per_model_threads;
    tf_error_init(&err);
    /* The draws are kept so that the prior sensitivity (sensitivity.h) costs no new likelihood
     * estimates; out of memory for them leaves the estimate whole and the sensitivity without
     * this candidate. */
    e->kept = tf_evidence_draws_new();
    st = tf_evidence_estimate_fit_kept(e->post, j->c->s, e->fit, &eo, j->stop, &e->ev, e->kept, &err);
    if (st == TF_ERR_INTERRUPTED) {
        e->interrupted = 1;
        return;
    }
    if (st != TF_OK) {
        fail_note(e, "the marginal likelihood", &err);
        notify(j, i, TF_COMPARE_FAILED);
        return;
    }
    notify(j, i, TF_COMPARE_DONE);
}

static void *run_thread(void *arg)
{
    run_job *j = arg;
    for (;;) {
        pthread_mutex_lock(&j->lock);
        size_t k = j->next++;
        pthread_mutex_unlock(&j->lock);
        if (k >= j->n_todo || (j->stop && *j->stop))
            break;
        run_one(j, j->todo[k]);
    }
    return NULL;
}

/* Convergence summary and cautions of a fitted candidate. */
static void describe_fitted(entry *e)
{
    /* The fit's one health summary, with its NaN rule (sampler/fit.h). */
    tf_fit_health_summary h = tf_fit_health(e->fit);
    e->fig.rhat_max = h.max_rhat;
    e->fig.ess_min = h.min_ess;
    size_t len = 0;
    e->note[0] = '\0';
#define ADD_NOTE(...)                                                                                   \
    do {                                                                                                \
        if (len < sizeof e->note) {                                                                     \
            int k_ = snprintf(e->note + len, sizeof e->note - len, "%s", len ? "; " : "");              \
            if (k_ > 0)                                                                                 \
                len += (size_t)k_;                                                                      \
        }                                                                                               \
        if (len < sizeof e->note) {                                                                     \
            int k_ = snprintf(e->note + len, sizeof e->note - len, __VA_ARGS__);                        \
            if (k_ > 0)                                                                                 \
                len += (size_t)k_;                                                                      \
        }                                                                                               \
    } while (0)
    if (!h.converged)
        ADD_NOTE("the chains may not have converged (R-hat max %.3f, ESS min %.0f; wanted <= %.2f and >= %.0f)",
                 h.max_rhat, h.min_ess, TF_FIT_RHAT_MAX, TF_FIT_ESS_MIN);
    const tf_evidence *ev = &e->ev;
    if (!(ev->main.pareto_k <= TF_PARETO_K_MAX) || !(ev->check.pareto_k <= TF_PARETO_K_MAX))
        ADD_NOTE("importance weights unreliable (Pareto k %.2f and %.2f; above %.1f the estimate cannot be trusted)",
                 ev->main.pareto_k, ev->check.pareto_k, TF_PARETO_K_MAX);
    if (!ev->agree)
        ADD_NOTE("the two importance densities disagree by %.1f standard errors", fabs(ev->z_diff));
#undef ADD_NOTE
}

static tf_status run_all(tf_comparison *c, const tf_compare_options *opt, const volatile sig_atomic_t *stop,
                         tf_error *err)
{
    run_job j;
    memset(&j, 0, sizeof j);
    j.c = c;
    j.opt = opt;
    j.stop = stop;
    j.todo = malloc(c->n * sizeof *j.todo);
    if (!j.todo)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    for (size_t i = 0; i < c->n; i++)
        if (c->e[i].state == TF_CANDIDATE_FITTED)
            j.todo[j.n_todo++] = i;
    size_t n_workers = opt->n_threads < j.n_todo ? opt->n_threads : j.n_todo;
    if (n_workers < 1)
        n_workers = 1;
    j.per_model_threads = opt->n_threads / n_workers;
    if (j.per_model_threads < 1)
        j.per_model_threads = 1;
    clock_gettime(CLOCK_MONOTONIC, &j.t0);
    if (pthread_mutex_init(&j.lock, NULL) != 0) {
        free(j.todo);
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "cannot create a lock");
    }
    pthread_t tid[MAX_THREADS];
    size_t n_started = 0;
    for (size_t w = 1; w < n_workers && w < MAX_THREADS; w++) {
        if (pthread_create(&tid[n_started], NULL, run_thread, &j) != 0)
            break;
        n_started++;
    }
    run_thread(&j);
    for (size_t w = 0; w < n_started; w++)
        pthread_join(tid[w], NULL);
    pthread_mutex_destroy(&j.lock);
    free(j.todo);
    int interrupted = stop && *stop;
    for (size_t i = 0; i < c->n; i++)
        interrupted |= c->e[i].interrupted;
    if (interrupted)
        return tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
    return TF_OK;
}

static void figures(tf_comparison *c)
{
    double l[TF_COMPARE_MAX_MODELS], se[TF_COMPARE_MAX_MODELS], w[TF_COMPARE_MAX_MODELS];
    double p[TF_COMPARE_MAX_MODELS], pse[TF_COMPARE_MAX_MODELS];
    size_t idx[TF_COMPARE_MAX_MODELS], n = 0;
    c->best = c->n;
    for (size_t i = 0; i < c->n; i++) {
        entry *e = &c->e[i];
        tf_candidate_figures *f = &e->fig;
        f->log_bf = f->log_bf_se = f->prior_weight = f->prob = f->prob_se = NAN;
        if (e->state != TF_CANDIDATE_FITTED) {
            f->rhat_max = f->ess_min = NAN;
            continue;
        }
        describe_fitted(e);
        idx[n] = i;
        l[n] = e->ev.main.log_ml;
        se[n] = e->ev.main.se;
        w[n] = e->weight;
        if (c->best == c->n || l[n] > c->e[c->best].ev.main.log_ml)
            c->best = i;
        n++;
    }
    c->n_fitted = n;
    if (n == 0)
        return;
    tf_compare_probabilities(l, se, w, n, p, pse);
    double wsum = 0;
    for (size_t k = 0; k < n; k++)
        wsum += w[k];
    const entry *best = &c->e[c->best];
    for (size_t k = 0; k < n; k++) {
        entry *e = &c->e[idx[k]];
        tf_candidate_figures *f = &e->fig;
        f->log_bf = l[k] - best->ev.main.log_ml;
        f->log_bf_se = idx[k] == c->best ? 0.0 : sqrt(se[k] * se[k] + best->ev.main.se * best->ev.main.se);
        f->prior_weight = w[k] / wsum;
        f->prob = p[k];
        f->prob_se = pse[k];
    }
}

tf_status tf_compare_run(const tf_series *s, const tf_compare_options *opt, const volatile sig_atomic_t *stop,
                         tf_comparison **out, tf_error *err)
{
    *out = NULL;
    if (!opt->priors)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "no priors callback given");
    if (opt->n_threads < 1 || opt->n_threads > MAX_THREADS)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "the thread count must be 1 to %d", MAX_THREADS);
    if (opt->n_weights && (!opt->weight_names || !opt->weights))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "prior weights without names");
    tf_comparison *c = calloc(1, sizeof *c);
    if (!c)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    c->s = s;
    tf_status st = build_candidates(c, opt, err);
    if (st == TF_OK)
        st = apply_weights(c, opt, err);
    if (st != TF_OK)
        goto fail;
    size_t n_fit = 0;
    for (size_t i = 0; i < c->n; i++) {
        entry *e = &c->e[i];
        if (e->state != TF_CANDIDATE_FITTED)
            continue;
        /* Set up every candidate before the first long run, so that a bad prior file is
         * reported at once. */
        if ((st = tf_model_new(e->g->name, e->o->name, &e->m, err)) != TF_OK ||
            (st = tf_model_initial_from_series(e->m, s, err)) != TF_OK ||
            (st = opt->priors(opt->priors_ctx, e->m, s, &e->priors, err)) != TF_OK ||
            (st = tf_posterior_new(e->m, e->priors, &e->post, err)) != TF_OK)
            goto fail;
        n_fit++;
    }
    if (n_fit == 0) {
        for (size_t i = 0; i < c->n && i < TF_ERROR_MAX - 1; i++)
            tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "%s: %s", c->e[i].name, c->e[i].note);
        st = tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, "check the counts with 'tallyfit check'",
                          "no candidate model can be fitted to these counts");
        goto fail;
    }
    if ((st = run_all(c, opt, stop, err)) != TF_OK)
        goto fail;
    figures(c);
    *out = c;
    return TF_OK;
fail:
    tf_comparison_free(c);
    return st;
}

/* ---- accessors ---- */

const tf_series *tf_comparison_series(const tf_comparison *c) { return c->s; }
tf_compare_scale tf_comparison_scale(const tf_comparison *c) { return c->scale; }
size_t tf_comparison_n_models(const tf_comparison *c) { return c->n; }
size_t tf_comparison_best(const tf_comparison *c) { return c->best; }
size_t tf_comparison_n_fitted(const tf_comparison *c) { return c->n_fitted; }
const char *tf_comparison_name(const tf_comparison *c, size_t i) { return c->e[i].name; }
const tf_growth_type *tf_comparison_growth(const tf_comparison *c, size_t i) { return c->e[i].g; }
const tf_obs_type *tf_comparison_obs(const tf_comparison *c, size_t i) { return c->e[i].o; }
tf_candidate_state tf_comparison_state(const tf_comparison *c, size_t i) { return c->e[i].state; }
const char *tf_comparison_note(const tf_comparison *c, size_t i) { return c->e[i].note; }

const tf_model *tf_comparison_model(const tf_comparison *c, size_t i)
{
    return c->e[i].state == TF_CANDIDATE_FITTED ? c->e[i].m : NULL;
}

const tf_posterior *tf_comparison_posterior(const tf_comparison *c, size_t i)
{
    return c->e[i].state == TF_CANDIDATE_FITTED ? c->e[i].post : NULL;
}

const tf_fit *tf_comparison_fit(const tf_comparison *c, size_t i)
{
    return c->e[i].state == TF_CANDIDATE_FITTED ? c->e[i].fit : NULL;
}

const tf_evidence_draws *tf_comparison_evidence_draws(const tf_comparison *c, size_t i)
{
    return i < c->n && c->e[i].state == TF_CANDIDATE_FITTED && c->e[i].kept && tf_evidence_draws_n(c->e[i].kept) > 0
               ? c->e[i].kept
               : NULL;
}

const tf_evidence *tf_comparison_evidence(const tf_comparison *c, size_t i)
{
    return c->e[i].state == TF_CANDIDATE_FITTED ? &c->e[i].ev : NULL;
}

const tf_candidate_figures *tf_comparison_figures(const tf_comparison *c, size_t i) { return &c->e[i].fig; }
