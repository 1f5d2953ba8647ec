/* Prior sensitivity of a comparison by reweighting its importance draws; see sensitivity.h. */
#include "compare/sensitivity.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "compare/pareto.h"
#include "sampler/posterior.h"

struct tf_sensitivity {
    const tf_comparison *c;
    size_t n_rows, n_models;
    char (*labels)[64];
    tf_sens_cell *cells;           /* n_rows x n_models */
    char (*notes)[160];            /* n_rows x n_models */
    tf_prior_set **priors;         /* n_rows x n_models; NULL = the fitted priors */
    size_t *best;                  /* n_rows */
    unsigned char *is_scale;       /* n_rows */
};

void tf_sensitivity_free(tf_sensitivity *s)
{
    if (!s)
        return;
    if (s->priors)
        for (size_t k = 0; k < s->n_rows * s->n_models; k++)
            tf_prior_set_free(s->priors[k]);
    free(s->priors);
    free(s->labels);
    free(s->cells);
    free(s->notes);
    free(s->best);
    free(s->is_scale);
    free(s);
}

size_t tf_sensitivity_standard(const tf_comparison *c, tf_sensitivity_alternative *out, size_t max)
{
    const tf_growth_type *base = tf_model_find_growth(TF_SENSITIVITY_BASELINE);
    size_t n = 0;
    /* Parameter names seen so far, so that a name shared by several candidates (K of Ricker and
     * Gompertz) gives one pair of alternatives that changes all of them. */
    const char *seen[TF_SENSITIVITY_MAX_ALTERNATIVES];
    size_t n_seen = 0;
    for (size_t i = 0; i < tf_comparison_n_models(c); i++) {
        const tf_model *m = tf_comparison_model(c, i);
        if (!m)
            continue;
        for (size_t j = 0; j < tf_model_n_params(m); j++) {
            const char *name = tf_model_param_name(m, j);
            int shared = !strcmp(name, "sigma");
            for (size_t b = 0; base && b < base->n_params && !shared; b++)
                shared = !strcmp(base->param_names[b], name);
            for (size_t k = 0; k < n_seen && !shared; k++)
                shared = !strcmp(seen[k], name);
            if (shared || n_seen == TF_SENSITIVITY_MAX_ALTERNATIVES)
                continue;
            seen[n_seen++] = name;
            for (int h = 0; h < 2 && n < max; h++) {
                tf_sensitivity_alternative *a = &out[n++];
                memset(a, 0, sizeof *a);
                a->factor = h ? 2.0 : 0.5;
                snprintf(a->param, sizeof a->param, "%s", name);
                snprintf(a->label, sizeof a->label, "%s x%g", name, a->factor);
            }
        }
    }
    for (int h = 0; h < 2 && n < max; h++) {
        tf_sensitivity_alternative *a = &out[n++];
        memset(a, 0, sizeof *a);
        a->factor = h ? 2.0 : 0.5;
        snprintf(a->label, sizeof a->label, "all x%g", a->factor);
    }
    return n;
}

/* The fitted priors with the scale alternative a applied into *out; *changed says whether any
 * prior changed (if not, *out is NULL). */
static tf_status scaled_priors(const tf_prior_set *fitted, const tf_sensitivity_alternative *a, tf_prior_set **out,
                               int *changed, tf_error *err)
{
    *out = NULL;
    *changed = 0;
    tf_prior_set *set = NULL;
    tf_status st = TF_OK;
    for (size_t j = 0; j < tf_prior_set_n_params(fitted); j++) {
        if (a->param[0] && strcmp(a->param, tf_prior_set_name(fitted, j)))
            continue;
        if (!set && (st = tf_prior_set_copy(fitted, &set, err)) != TF_OK)
            return st;
        tf_prior p;
        if ((st = tf_prior_rescale(tf_prior_set_prior(fitted, j), a->factor, &p, err)) != TF_OK ||
            (st = tf_prior_set_assign(set, tf_prior_set_name(fitted, j), &p, err)) != TF_OK) {
            tf_prior_set_free(set);
            return st;
        }
        *changed = 1;
    }
    *out = set;
    return TF_OK;
}

/* Whether two prior sets of the same parameters give every parameter the same prior. */
static int same_priors(const tf_prior_set *a, const tf_prior_set *b)
{
    if (tf_prior_set_n_params(a) != tf_prior_set_n_params(b))
        return 0;
    for (size_t j = 0; j < tf_prior_set_n_params(a); j++) {
        const tf_prior *p = tf_prior_set_prior(a, j), *q = tf_prior_set_prior(b, j);
        if (!p || !q || p->kind != q->kind || memcmp(p->par, q->par, sizeof p->par) || p->trunc_lo != q->trunc_lo ||
            p->trunc_hi != q->trunc_hi)
            return 0;
    }
    return 1;
}

typedef struct {
    const tf_prior_set *old, *new;
} ratio_ctx;

static double set_log_ratio(const tf_prior_set *old, const tf_prior_set *new, const double *theta)
{
    double lp = tf_prior_set_log_density(old, theta), ln = tf_prior_set_log_density(new, theta);
    if (!(ln > -INFINITY))
        return -INFINITY;
    if (!(lp > -INFINITY))
        return INFINITY;
    return ln - lp;
}

static double ratio_fn(void *ctx, const double *theta)
{
    const ratio_ctx *r = ctx;
    return set_log_ratio(r->old, r->new, theta);
}

/* One candidate under one alternative's priors (set != NULL). */
static tf_status estimate_cell(tf_sensitivity *s, size_t row, size_t i, const tf_sensitivity_options *opt,
                               const volatile sig_atomic_t *stop, tf_error *err)
{
    const tf_comparison *c = s->c;
    tf_sens_cell *cell = &s->cells[row * s->n_models + i];
    char *note = s->notes[row * s->n_models + i];
    const tf_prior_set *set = s->priors[row * s->n_models + i];
    const tf_posterior *post = tf_comparison_posterior(c, i);
    const tf_evidence_draws *kd = tf_comparison_evidence_draws(c, i);
    tf_evidence_estimate e;
    size_t unc = 0;
    tf_error quiet;
    tf_error_init(&quiet);
    int trusted = 0;
    if (kd) {
        ratio_ctx rc = {tf_posterior_priors(post), set};
        tf_status st = tf_evidence_reweight(kd, ratio_fn, &rc, &e, &unc, &quiet);
        if (st == TF_ERR_NOMEM)
            return tf_error_add(err, st, NULL, 0, 0, NULL, "out of memory reweighting the importance draws");
        if (st == TF_OK) {
            cell->state = TF_SENS_REWEIGHTED;
            cell->log_ml = e.log_ml;
            cell->log_ml_se = e.se;
            cell->pareto_k = e.pareto_k;
            trusted = e.pareto_k <= TF_PARETO_K_MAX && unc == 0;
            if (!trusted && unc)
                snprintf(note, 160, "%zu importance draws lie where only the new prior has mass", unc);
            else if (!trusted)
                snprintf(note, 160, "reweighted importance weights too heavy-tailed (Pareto k %.2f)", e.pareto_k);
        } else {
            cell->state = TF_SENS_FAILED;
            snprintf(note, 160, "every reweighted importance weight is zero");
        }
    } else {
        cell->state = TF_SENS_FAILED;
        snprintf(note, 160, "the importance draws were not kept");
    }
    if (trusted)
        return TF_OK;
    if (!opt->refit) {
        if (cell->state == TF_SENS_REWEIGHTED)
            cell->state = TF_SENS_UNRELIABLE;
        return TF_OK;
    }
    if (stop && *stop)
        return tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
    /* A new importance-sampling run under the new prior: the same model and PMMH draws (which
     * seed the importance density; its adaptation rounds move it towards the new posterior). */
    tf_posterior *np = NULL;
    tf_evidence ev;
    tf_error_init(&quiet);
    tf_status st = tf_posterior_new(tf_comparison_model(c, i), set, &np, &quiet);
    if (st == TF_OK)
        st = tf_evidence_estimate_fit(np, tf_comparison_series(c), tf_comparison_fit(c, i), &opt->evidence, stop, &ev,
                                      &quiet);
    tf_posterior_free(np);
    if (st == TF_ERR_INTERRUPTED || st == TF_ERR_NOMEM)
        return tf_error_add(err, st, NULL, 0, 0, NULL, st == TF_ERR_NOMEM ? "out of memory" : "interrupted");
    if (st != TF_OK) {
        cell->state = TF_SENS_FAILED;
        snprintf(note, 160, "the new estimate failed: %.120s", quiet.n_items ? quiet.items[0].what : "unknown error");
        return TF_OK;
    }
    cell->state = ev.reliable ? TF_SENS_REFITTED : TF_SENS_UNRELIABLE;
    cell->log_ml = ev.main.log_ml;
    cell->log_ml_se = ev.main.se;
    cell->pareto_k = ev.main.pareto_k;
    snprintf(note, 160, "%s", ev.reliable ? "estimated again under this prior (the reweighted draws did not cover it)"
                                          : "estimated again under this prior, still with heavy-tailed weights");
    return TF_OK;
}

/* Probabilities of one row from its estimated cells. */
static void row_probabilities(tf_sensitivity *s, size_t row)
{
    double l[TF_COMPARE_MAX_MODELS], se[TF_COMPARE_MAX_MODELS], w[TF_COMPARE_MAX_MODELS], p[TF_COMPARE_MAX_MODELS],
        pse[TF_COMPARE_MAX_MODELS];
    size_t idx[TF_COMPARE_MAX_MODELS], n = 0;
    for (size_t i = 0; i < s->n_models && n < TF_COMPARE_MAX_MODELS; i++) {
        tf_sens_cell *cell = &s->cells[row * s->n_models + i];
        cell->prob = 0;
        cell->prob_se = NAN;
        if (cell->state == TF_SENS_FAILED || cell->state == TF_SENS_NOT_FITTED || !isfinite(cell->log_ml))
            continue;
        l[n] = cell->log_ml;
        se[n] = cell->log_ml_se;
        w[n] = tf_comparison_figures(s->c, i)->prior_weight;
        if (!(w[n] > 0))
            w[n] = 1;
        idx[n++] = i;
    }
    s->best[row] = s->n_models;
    if (!n)
        return;
    tf_compare_probabilities(l, se, w, n, p, pse);
    double top = -1;
    for (size_t k = 0; k < n; k++) {
        tf_sens_cell *cell = &s->cells[row * s->n_models + idx[k]];
        cell->prob = p[k];
        cell->prob_se = pse[k];
        if (p[k] > top) {
            top = p[k];
            s->best[row] = idx[k];
        }
    }
}

tf_status tf_sensitivity_run(const tf_comparison *c, const tf_sensitivity_alternative *alt, size_t n_alt,
                             const tf_sensitivity_options *opt, const volatile sig_atomic_t *stop,
                             tf_sensitivity **out, tf_error *err)
{
    *out = NULL;
    if (n_alt > TF_SENSITIVITY_MAX_ALTERNATIVES)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "at most %d prior alternatives, got %zu",
                            TF_SENSITIVITY_MAX_ALTERNATIVES, n_alt);
    for (size_t a = 0; a < n_alt; a++)
        if (!alt[a].priors && !(alt[a].factor > 0 && alt[a].factor < INFINITY))
            return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "prior alternative '%s': bad scale factor %g",
                                alt[a].label, alt[a].factor);
    tf_sensitivity *s = calloc(1, sizeof *s);
    if (!s)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    s->c = c;
    s->n_rows = n_alt + 1;
    s->n_models = tf_comparison_n_models(c);
    size_t nm = s->n_models ? s->n_models : 1, nc = s->n_rows * nm;
    s->labels = calloc(s->n_rows, sizeof *s->labels);
    s->cells = calloc(nc, sizeof *s->cells);
    s->notes = calloc(nc, sizeof *s->notes);
    s->priors = calloc(nc, sizeof *s->priors);
    s->best = calloc(s->n_rows, sizeof *s->best);
    s->is_scale = calloc(s->n_rows, 1);
    tf_status st = TF_OK;
    if (!s->labels || !s->cells || !s->notes || !s->priors || !s->best || !s->is_scale) {
        st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
        goto fail;
    }
    snprintf(s->labels[0], sizeof s->labels[0], "fitted");
    s->is_scale[0] = 1;
    for (size_t a = 0; a < n_alt; a++) {
        snprintf(s->labels[a + 1], sizeof s->labels[0], "%s", alt[a].label);
        s->is_scale[a + 1] = !alt[a].priors;
    }
    for (size_t row = 0; row < s->n_rows; row++)
        for (size_t i = 0; i < s->n_models; i++) {
            tf_sens_cell *cell = &s->cells[row * s->n_models + i];
            cell->log_ml = cell->log_ml_se = cell->pareto_k = cell->prob_se = NAN;
            const tf_posterior *post = tf_comparison_posterior(c, i);
            if (!post) {
                cell->state = TF_SENS_NOT_FITTED;
                continue;
            }
            const tf_evidence *ev = tf_comparison_evidence(c, i);
            cell->state = ev->reliable ? TF_SENS_REWEIGHTED : TF_SENS_UNRELIABLE;
            if (!ev->reliable)
                snprintf(s->notes[row * s->n_models + i], sizeof s->notes[0],
                         "the comparison's own estimate is flagged (see its models table)");
            cell->log_ml = ev->main.log_ml;
            cell->log_ml_se = ev->main.se;
            cell->pareto_k = ev->main.pareto_k;
            if (row == 0)
                continue;
            const tf_sensitivity_alternative *a = &alt[row - 1];
            const tf_prior_set *fitted = tf_posterior_priors(post);
            tf_prior_set **set = &s->priors[row * s->n_models + i];
            if (a->priors) {
                if ((st = a->priors(a->ctx, tf_comparison_model(c, i), tf_comparison_series(c), fitted, set, err)) !=
                    TF_OK) {
                    tf_error_add(err, st, NULL, 0, 0, NULL, "prior alternative '%s', model %s", a->label,
                                 tf_comparison_name(c, i));
                    goto fail;
                }
                cell->changed = !same_priors(fitted, *set);
                if (!cell->changed) {
                    tf_prior_set_free(*set);
                    *set = NULL;
                }
            } else if ((st = scaled_priors(fitted, a, set, &cell->changed, err)) != TF_OK) {
                tf_error_add(err, st, NULL, 0, 0, NULL, "prior alternative '%s', model %s", a->label,
                             tf_comparison_name(c, i));
                goto fail;
            }
            if (*set && (st = estimate_cell(s, row, i, opt, stop, err)) != TF_OK)
                goto fail;
        }
    for (size_t row = 0; row < s->n_rows; row++)
        row_probabilities(s, row);
    *out = s;
    return TF_OK;
fail:
    tf_sensitivity_free(s);
    return st;
}

size_t tf_sensitivity_n_rows(const tf_sensitivity *s) { return s->n_rows; }
size_t tf_sensitivity_n_models(const tf_sensitivity *s) { return s->n_models; }
const char *tf_sensitivity_label(const tf_sensitivity *s, size_t row) { return s->labels[row]; }
int tf_sensitivity_is_scale(const tf_sensitivity *s, size_t row) { return s->is_scale[row]; }
const char *tf_sensitivity_model_name(const tf_sensitivity *s, size_t model)
{
    return tf_comparison_name(s->c, model);
}
const tf_sens_cell *tf_sensitivity_cell(const tf_sensitivity *s, size_t row, size_t model)
{
    return &s->cells[row * s->n_models + model];
}
const char *tf_sensitivity_note(const tf_sensitivity *s, size_t row, size_t model)
{
    return s->notes[row * s->n_models + model];
}
size_t tf_sensitivity_best(const tf_sensitivity *s, size_t row) { return s->best[row]; }

void tf_sensitivity_range(const tf_sensitivity *s, double *prob_min, double *prob_max, int *best_changes)
{
    size_t b0 = s->best[0];
    *prob_min = *prob_max = NAN;
    *best_changes = 0;
    if (b0 >= s->n_models)
        return;
    *prob_min = INFINITY;
    *prob_max = -INFINITY;
    for (size_t row = 0; row < s->n_rows; row++) {
        double p = s->cells[row * s->n_models + b0].prob;
        *prob_min = fmin(*prob_min, p);
        *prob_max = fmax(*prob_max, p);
        *best_changes |= s->best[row] != b0;
    }
}

double tf_sensitivity_log_ratio(const tf_sensitivity *s, size_t row, size_t model, const double *theta)
{
    const tf_prior_set *set = s->priors[row * s->n_models + model];
    const tf_posterior *post = tf_comparison_posterior(s->c, model);
    if (!set || !post)
        return 0.0;
    return set_log_ratio(tf_posterior_priors(post), set, theta);
}
