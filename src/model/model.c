/* A joined model: one growth model, one observation model, the parameter vector's layout and
 * the first-year prior. */
#include <assert.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "model/model_internal.h"

struct tf_model {
    const tf_growth_type *growth;
    const tf_obs_type *obs;
    char name[64];
    size_t n_params;
    const char *names[TF_MAX_PARAMS];
    double lower[TF_MAX_PARAMS], upper[TF_MAX_PARAMS];
    double x1_mean, x1_sd;
};

static void list_names(char *buf, size_t size, size_t n, const char *(*name_at)(size_t))
{
    if (!size)
        return;
    buf[0] = '\0';
    size_t used = 0;
    for (size_t i = 0; i < n && used < size; i++) {
        int k = snprintf(buf + used, size - used, "%s%s", i ? ", " : "", name_at(i));
        if (k < 0)
            break;
        used += (size_t)k;
    }
}

static const char *growth_name_at(size_t i) { return tf_model_growth_at(i)->name; }
static const char *obs_name_at(size_t i) { return tf_model_obs_at(i)->name; }

void tf_model_list_growth(char *buf, size_t size) { list_names(buf, size, tf_model_n_growth(), growth_name_at); }
void tf_model_list_obs(char *buf, size_t size) { list_names(buf, size, tf_model_n_obs(), obs_name_at); }

tf_status tf_model_new(const char *growth, const char *obs, tf_model **out, tf_error *err)
{
    *out = NULL;
    char known[256], hint[300];
    const tf_growth_type *g = tf_model_find_growth(growth);
    if (!g) {
        tf_model_list_growth(known, sizeof known);
        snprintf(hint, sizeof hint, "known growth models: %s", known);
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, hint, "unknown growth model '%s'",
                            growth ? growth : "");
    }
    const tf_obs_type *o = tf_model_find_obs(obs);
    if (!o) {
        tf_model_list_obs(known, sizeof known);
        snprintf(hint, sizeof hint, "known observation models: %s", known);
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, hint, "unknown observation model '%s'",
                            obs ? obs : "");
    }
    /* The table is ours: these are programming errors, not user input. */
    assert(g->n_params + 1 + o->n_params <= TF_MAX_PARAMS);
    assert(o->n_year_const <= TF_OBS_MAX_CONST);

    tf_model *m = calloc(1, sizeof *m);
    if (!m)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory creating a model");
    m->growth = g;
    m->obs = o;
    snprintf(m->name, sizeof m->name, "%s+%s", g->name, o->name);
    size_t k = 0;
    for (size_t i = 0; i < g->n_params; i++, k++) {
        m->names[k] = g->param_names[i];
        m->lower[k] = g->lower[i];
        m->upper[k] = g->upper[i];
    }
    m->names[k] = "sigma";
    m->lower[k] = 0.0;
    m->upper[k] = INFINITY;
    k++;
    for (size_t i = 0; i < o->n_params; i++, k++) {
        m->names[k] = o->param_names[i];
        m->lower[k] = o->lower[i];
        m->upper[k] = o->upper[i];
    }
    m->n_params = k;
    m->x1_mean = 0.0;
    m->x1_sd = 1.0;
    *out = m;
    return TF_OK;
}

void tf_model_free(tf_model *m) { free(m); }

const tf_growth_type *tf_model_growth(const tf_model *m) { return m->growth; }
const tf_obs_type *tf_model_obs(const tf_model *m) { return m->obs; }
size_t tf_model_n_params(const tf_model *m) { return m->n_params; }
const char *tf_model_param_name(const tf_model *m, size_t i) { return i < m->n_params ? m->names[i] : NULL; }
double tf_model_param_lower(const tf_model *m, size_t i) { return i < m->n_params ? m->lower[i] : NAN; }
double tf_model_param_upper(const tf_model *m, size_t i) { return i < m->n_params ? m->upper[i] : NAN; }
size_t tf_model_sigma_index(const tf_model *m) { return m->growth->n_params; }
const char *tf_model_name(const tf_model *m) { return m->name; }

int tf_model_param_index(const tf_model *m, const char *name)
{
    for (size_t i = 0; name && i < m->n_params; i++)
        if (!strcmp(m->names[i], name))
            return (int)i;
    return -1;
}

void tf_model_set_initial(tf_model *m, double x1_mean, double x1_sd)
{
    m->x1_mean = x1_mean;
    m->x1_sd = x1_sd;
}

double tf_model_x1_mean(const tf_model *m) { return m->x1_mean; }
double tf_model_x1_sd(const tf_model *m) { return m->x1_sd; }

tf_status tf_model_check_params(const tf_model *m, const double *theta, tf_error *err)
{
    for (size_t i = 0; i < m->n_params; i++) {
        /* Written so that NaN fails too. */
        if (!(theta[i] > m->lower[i] && theta[i] < m->upper[i])) {
            char hint[160];
            snprintf(hint, sizeof hint, "%s must lie strictly between %g and %g", m->names[i], m->lower[i],
                     m->upper[i]);
            return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, hint,
                                "parameter %s = %g is outside its range for model %s", m->names[i], theta[i],
                                m->name);
        }
    }
    return TF_OK;
}

/* Why these defaults: the first few counts are the only information about N_1 before any model
 * is fitted, and their mean is less noisy than the first count alone; averaging over at most 3
 * years keeps the trend of a changing population from dragging the mean far from year 1. A zero
 * counts as 0.5 so that the logarithm exists (the usual continuity correction; common practice,
 * no source). x1_sd = 1 lets the first year's abundance range over a factor e either way (68 %),
 * wider than the counting error of a mean count of a few animals or more, yet narrow enough that
 * particles are not wasted far from the data. */
tf_status tf_model_initial_from_series(tf_model *m, const tf_series *s, tf_error *err)
{
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    size_t n = tf_series_n_years(s), used = 0;
    double sum = 0.0;
    for (size_t i = 0; i < n && used < TF_MODEL_X1_YEARS; i++) {
        if (isnan(y[i]))
            continue;
        sum += (y[i] > 0 ? y[i] : 0.5) / e[i];
        used++;
    }
    if (!used)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "the series has no surveyed year to start the model from");
    tf_model_set_initial(m, log(sum / (double)used), 1.0);
    return TF_OK;
}

void tf_model_take(double take, double *x, size_t n)
{
    if (take == 0)
        return;
    for (size_t i = 0; i < n; i++) {
        /* What is left within rounding of nothing (e^ln 10 - 10 = 2e-15) is nothing. */
        double here = exp(x[i]), left = here - take;
        x[i] = left > 1e-12 * here ? fmax(log(left), TF_MODEL_LOG_EXTINCT) : TF_MODEL_LOG_EXTINCT;
    }
}

void tf_model_drift_alive(const tf_growth_type *g, const double *p, const double *x, double *out, size_t n)
{
    /* The drift may write in place, so the extinct ones are found first; a block at a time keeps
     * the marks on the stack. */
    enum { BLOCK = 256 };
    for (size_t start = 0; start < n; start += BLOCK) {
        size_t len = n - start < BLOCK ? n - start : BLOCK;
        unsigned char gone[BLOCK];
        int any = 0;
        for (size_t i = 0; i < len; i++)
            any |= gone[i] = x[start + i] <= TF_MODEL_EXTINCT_BELOW;
        g->drift(p, x + start, out + start, len);
        if (any)
            for (size_t i = 0; i < len; i++)
                if (gone[i])
                    out[start + i] = TF_MODEL_LOG_EXTINCT;
    }
}

tf_status tf_model_simulate(const tf_model *m, const double *theta, double x1, const double *effort,
                            size_t n_years, tf_rng *rng, double *x, double *y, tf_error *err)
{
    return tf_model_simulate_harvest(m, theta, x1, effort, NULL, n_years, rng, x, y, NULL, err);
}

/* Animals removed from a population of `animals` by h: whole animals, at most those there are. */
static double harvest_of(const tf_model_harvest *h, double animals)
{
    double want = h->share > 0 ? h->share * animals : h->count;
    return fmin(round(want), floor(animals));
}

tf_status tf_model_simulate_harvest(const tf_model *m, const double *theta, double x1, const double *effort,
                                    const tf_model_harvest *h, size_t n_years, tf_rng *rng, double *x, double *y,
                                    double *removed, tf_error *err)
{
    const double *p_growth = theta, sigma = theta[m->growth->n_params];
    const double *p_obs = theta + m->growth->n_params + 1;
    gsl_rng view;
    tf_rng_gsl_view(rng, &view);
    double xt = x1;
    for (size_t t = 0; t < n_years; t++) {
        double mu = (effort ? effort[t] : 1.0) * exp(xt);
        /* x = -inf (extinct) is a valid state with mu = 0; NaN and +inf are not. */
        if (isnan(xt) || !(mu < INFINITY))
            return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0,
                                "try a smaller r or start, or fewer years",
                                "the simulated abundance overflowed in year %zu", t + 1);
        x[t] = xt;
        y[t] = m->obs->draw(p_obs, mu, &view);
        if (m->obs->needs_positive && !(y[t] > 0))
            return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0,
                                "use a count model such as poisson or negbin, which can count zero",
                                "the simulated count in year %zu is zero, which the %s model cannot produce",
                                t + 1, m->obs->name);
        double took = 0.0;
        if (h && xt > -INFINITY) {
            double q = h->counted_fraction > 0 ? h->counted_fraction : 1.0;
            double animals = exp(xt) / q;
            took = harvest_of(h, animals);
            if (took > 0)
                xt = animals - took > 0 ? log(q * (animals - took)) : -INFINITY;
        }
        if (removed)
            removed[t] = took;
        if (t + 1 < n_years && xt > -INFINITY) {
            double next;
            m->growth->drift(p_growth, &xt, &next, 1);
            xt = next + sigma * tf_rng_normal(rng);
        }
    }
    return TF_OK;
}

size_t tf_model_obs_unsuited(const tf_obs_type *o, const tf_series *s, int *zero)
{
    const double *y = tf_series_counts(s);
    size_t n = tf_series_n_years(s);
    *zero = 0;
    if (o->needs_integer) {
        size_t i = tf_series_first_fractional(s);
        if (i < n)
            return i;
    }
    if (o->needs_positive)
        for (size_t i = 0; i < n; i++)
            if (y[i] == 0) {
                *zero = 1;
                return i;
            }
    return n;
}
