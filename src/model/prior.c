/* Prior densities, distribution functions, quantiles and draws of the prior families, with
 * truncation normalised by the families' distribution functions (GSL's gsl_cdf_*). */
#include "model/prior.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_sf_gamma.h>

/* log(sqrt(2 pi)) */
#define LOG_SQRT_2PI 0.91893853320467274178

/* One family: its untruncated log density (called only inside the family's support), its
 * lower-tail P and upper-tail Q distribution functions (called only strictly inside the
 * support) and their inverses. Keeping both tails is what keeps far truncation exact. */
typedef struct {
    const char *name;
    size_t n_par;
    const char *par_names[TF_PRIOR_MAX_PAR];
    unsigned char par_positive[TF_PRIOR_MAX_PAR]; /* 1: a scale or shape (> 0); 0: a location */
    double (*logpdf)(const double *par, double x);
    double (*P)(const double *par, double x);
    double (*Q)(const double *par, double x);
    double (*Pinv)(const double *par, double p);
    double (*Qinv)(const double *par, double q);
    void (*support)(const double *par, double *lo, double *hi);
} family;

static void support_real(const double *par, double *lo, double *hi)
{
    (void)par;
    *lo = -INFINITY;
    *hi = INFINITY;
}

static void support_positive(const double *par, double *lo, double *hi)
{
    (void)par;
    *lo = 0;
    *hi = INFINITY;
}

/* normal: par = mean, sd */
static double normal_logpdf(const double *par, double x)
{
    double z = (x - par[0]) / par[1];
    return -0.5 * z * z - log(par[1]) - LOG_SQRT_2PI;
}
static double normal_P(const double *par, double x) { return gsl_cdf_gaussian_P(x - par[0], par[1]); }
static double normal_Q(const double *par, double x) { return gsl_cdf_gaussian_Q(x - par[0], par[1]); }
static double normal_Pinv(const double *par, double p) { return par[0] + gsl_cdf_gaussian_Pinv(p, par[1]); }
static double normal_Qinv(const double *par, double q) { return par[0] + gsl_cdf_gaussian_Qinv(q, par[1]); }

/* lognormal: par = meanlog, sdlog */
static double lognormal_logpdf(const double *par, double x)
{
    if (!(x > 0))
        return -INFINITY;
    double lx = log(x);
    double z = (lx - par[0]) / par[1];
    return -0.5 * z * z - log(par[1]) - LOG_SQRT_2PI - lx;
}
static double lognormal_P(const double *par, double x) { return gsl_cdf_lognormal_P(x, par[0], par[1]); }
static double lognormal_Q(const double *par, double x) { return gsl_cdf_lognormal_Q(x, par[0], par[1]); }
static double lognormal_Pinv(const double *par, double p) { return gsl_cdf_lognormal_Pinv(p, par[0], par[1]); }
static double lognormal_Qinv(const double *par, double q) { return gsl_cdf_lognormal_Qinv(q, par[0], par[1]); }

/* half-normal: par = sd. P(x) = erf(x / (sd sqrt 2)), Q(x) = erfc(x / (sd sqrt 2)). */
static double halfnormal_logpdf(const double *par, double x)
{
    if (x < 0)
        return -INFINITY;
    double z = x / par[0];
    return M_LN2 - 0.5 * z * z - log(par[0]) - LOG_SQRT_2PI;
}
static double halfnormal_P(const double *par, double x) { return erf(x / (par[0] * M_SQRT2)); }
static double halfnormal_Q(const double *par, double x) { return erfc(x / (par[0] * M_SQRT2)); }
static double halfnormal_Pinv(const double *par, double p)
{
    return par[0] * gsl_cdf_ugaussian_Pinv(0.5 + 0.5 * p);
}
static double halfnormal_Qinv(const double *par, double q) { return par[0] * gsl_cdf_ugaussian_Qinv(0.5 * q); }

/* gamma: par = shape, rate (GSL takes the scale 1 / rate) */
static double gamma_logpdf(const double *par, double x)
{
    if (!(x > 0))
        return -INFINITY;
    return par[0] * log(par[1]) - gsl_sf_lngamma(par[0]) + (par[0] - 1) * log(x) - par[1] * x;
}
static double gamma_P(const double *par, double x) { return gsl_cdf_gamma_P(x, par[0], 1 / par[1]); }
static double gamma_Q(const double *par, double x) { return gsl_cdf_gamma_Q(x, par[0], 1 / par[1]); }
static double gamma_Pinv(const double *par, double p) { return gsl_cdf_gamma_Pinv(p, par[0], 1 / par[1]); }
static double gamma_Qinv(const double *par, double q) { return gsl_cdf_gamma_Qinv(q, par[0], 1 / par[1]); }

/* uniform: par = min, max */
static double uniform_logpdf(const double *par, double x)
{
    (void)x;
    return -log(par[1] - par[0]);
}
static double uniform_P(const double *par, double x) { return (x - par[0]) / (par[1] - par[0]); }
static double uniform_Q(const double *par, double x) { return (par[1] - x) / (par[1] - par[0]); }
static double uniform_Pinv(const double *par, double p) { return par[0] + p * (par[1] - par[0]); }
static double uniform_Qinv(const double *par, double q) { return par[1] - q * (par[1] - par[0]); }
static void uniform_support(const double *par, double *lo, double *hi)
{
    *lo = par[0];
    *hi = par[1];
}

/* Student-t: par = location, scale, df */
static double student_logpdf(const double *par, double x)
{
    double nu = par[2], z = (x - par[0]) / par[1];
    return gsl_sf_lngamma(0.5 * (nu + 1)) - gsl_sf_lngamma(0.5 * nu) - 0.5 * log(nu * M_PI) - log(par[1]) -
           0.5 * (nu + 1) * log1p(z * z / nu);
}
static double student_P(const double *par, double x) { return gsl_cdf_tdist_P((x - par[0]) / par[1], par[2]); }
static double student_Q(const double *par, double x) { return gsl_cdf_tdist_Q((x - par[0]) / par[1], par[2]); }
static double student_Pinv(const double *par, double p) { return par[0] + par[1] * gsl_cdf_tdist_Pinv(p, par[2]); }
static double student_Qinv(const double *par, double q) { return par[0] + par[1] * gsl_cdf_tdist_Qinv(q, par[2]); }

static const family families[TF_PRIOR_N_KINDS] = {
    [TF_PRIOR_NORMAL] = {"normal", 2, {"mean", "sd"}, {0, 1}, normal_logpdf, normal_P, normal_Q, normal_Pinv,
                         normal_Qinv, support_real},
    [TF_PRIOR_LOGNORMAL] = {"lognormal", 2, {"meanlog", "sdlog"}, {0, 1}, lognormal_logpdf, lognormal_P, lognormal_Q,
                            lognormal_Pinv, lognormal_Qinv, support_positive},
    [TF_PRIOR_HALFNORMAL] = {"halfnormal", 1, {"sd"}, {1}, halfnormal_logpdf, halfnormal_P, halfnormal_Q,
                             halfnormal_Pinv, halfnormal_Qinv, support_positive},
    [TF_PRIOR_GAMMA] = {"gamma", 2, {"shape", "rate"}, {1, 1}, gamma_logpdf, gamma_P, gamma_Q, gamma_Pinv, gamma_Qinv,
                        support_positive},
    [TF_PRIOR_UNIFORM] = {"uniform", 2, {"min", "max"}, {0, 0}, uniform_logpdf, uniform_P, uniform_Q, uniform_Pinv,
                          uniform_Qinv, uniform_support},
    [TF_PRIOR_STUDENT_T] = {"student_t", 3, {"location", "scale", "df"}, {0, 1, 1}, student_logpdf, student_P, student_Q,
                            student_Pinv, student_Qinv, support_real},
};

static int kind_ok(tf_prior_kind kind) { return (int)kind >= 0 && kind < TF_PRIOR_N_KINDS; }

const char *tf_prior_kind_name(tf_prior_kind kind) { return kind_ok(kind) ? families[kind].name : NULL; }

int tf_prior_kind_from_name(const char *name)
{
    for (int k = 0; name && k < TF_PRIOR_N_KINDS; k++)
        if (!strcmp(name, families[k].name))
            return k;
    return -1;
}

size_t tf_prior_n_par(tf_prior_kind kind) { return kind_ok(kind) ? families[kind].n_par : 0; }

const char *tf_prior_par_name(tf_prior_kind kind, size_t i)
{
    return kind_ok(kind) && i < families[kind].n_par ? families[kind].par_names[i] : NULL;
}

const char *tf_prior_par_check(tf_prior_kind kind, size_t i, double value)
{
    if (!kind_ok(kind) || i >= families[kind].n_par)
        return "is not a parameter of this distribution";
    if (families[kind].par_positive[i])
        return isfinite(value) && value > 0 ? NULL : "must be a positive finite number";
    return isfinite(value) ? NULL : "must be a finite number";
}

/* Both tail probabilities of the untruncated family at x, exact 0/1 beyond the support. */
static void tails(const family *f, const double *par, double x, double *p, double *q)
{
    double lo, hi;
    f->support(par, &lo, &hi);
    if (x <= lo) {
        *p = 0;
        *q = 1;
    } else if (x >= hi) {
        *p = 1;
        *q = 0;
    } else {
        *p = f->P(par, x);
        *q = f->Q(par, x);
    }
}

/* Untruncated probability between a and b (a < b) from their tail probabilities, taking the
 * difference in the tail where both values are small so that no digits cancel. */
static double mass_between(double p_a, double q_a, double p_b, double q_b)
{
    if (p_b <= 0.5)
        return p_b - p_a;
    if (p_a >= 0.5)
        return q_a - q_b;
    return 1 - p_a - q_b;
}

/* "[a, b]", with "(" / ")" at infinite ends. */
static void interval(char *buf, size_t size, double lo, double hi)
{
    snprintf(buf, size, "%s%g, %g%s", isinf(lo) ? "(" : "[", lo, hi, isinf(hi) ? ")" : "]");
}

tf_status tf_prior_init(tf_prior *p, tf_prior_kind kind, const double *par, double lo, double hi,
                        tf_error *err)
{
    memset(p, 0, sizeof *p);
    if (!kind_ok(kind))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "unknown prior distribution (%d)", (int)kind);
    const family *f = &families[kind];
    p->kind = kind;
    for (size_t i = 0; i < f->n_par; i++) {
        const char *rule = tf_prior_par_check(kind, i, par[i]);
        if (rule)
            return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "%s prior: %s %s, got %g", f->name,
                                f->par_names[i], rule, par[i]);
        p->par[i] = par[i];
    }
    if (kind == TF_PRIOR_UNIFORM && !(par[0] < par[1]))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "uniform prior: min (%g) must be below max (%g)",
                            par[0], par[1]);
    if (isnan(lo) || isnan(hi) || !(lo < hi))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "%s prior: the lower truncation bound (%g) must be below the upper one (%g)", f->name,
                            lo, hi);
    p->trunc_lo = lo;
    p->trunc_hi = hi;
    double nat_lo, nat_hi;
    f->support(p->par, &nat_lo, &nat_hi);
    p->lower = fmax(nat_lo, lo);
    p->upper = fmin(nat_hi, hi);
    char cut[64], nat[64];
    interval(cut, sizeof cut, lo, hi);
    interval(nat, sizeof nat, nat_lo, nat_hi);
    if (!(p->lower < p->upper))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, "the truncation must overlap the distribution's support",
                            "%s prior: truncation to %s leaves nothing of its support %s", f->name, cut, nat);
    tails(f, p->par, p->lower, &p->p_lo, &p->q_lo);
    tails(f, p->par, p->upper, &p->p_hi, &p->q_hi);
    double mass = mass_between(p->p_lo, p->q_lo, p->p_hi, p->q_hi);
    if (!(mass > 0) || !isfinite(mass))
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0, "move the truncation bounds towards the bulk of the prior",
                            "%s prior: truncation to %s keeps no representable probability", f->name, cut);
    p->log_mass = log(mass);
    return TF_OK;
}

double tf_prior_log_density(const tf_prior *p, double x)
{
    if (!(x >= p->lower && x <= p->upper))
        return -INFINITY;
    return families[p->kind].logpdf(p->par, x) - p->log_mass;
}

double tf_prior_cdf(const tf_prior *p, double x)
{
    if (isnan(x))
        return NAN;
    if (x <= p->lower)
        return 0;
    if (x >= p->upper)
        return 1;
    double px, qx;
    tails(&families[p->kind], p->par, x, &px, &qx);
    double c = mass_between(p->p_lo, p->q_lo, px, qx) / exp(p->log_mass);
    return fmin(1.0, fmax(0.0, c));
}

double tf_prior_quantile(const tf_prior *p, double prob)
{
    if (!(prob >= 0 && prob <= 1))
        return NAN;
    if (prob == 0)
        return p->lower;
    if (prob == 1)
        return p->upper;
    const family *f = &families[p->kind];
    /* Target lower-tail probability of the untruncated family; invert through the lower tail
     * when it is at most one half, else through the upper tail (computed from the q's, which
     * are then the small, precise numbers). */
    double c = p->p_lo + prob * (p->p_hi - p->p_lo);
    double x;
    if (c <= 0.5)
        x = f->Pinv(p->par, c);
    else
        x = f->Qinv(p->par, p->q_hi + (1 - prob) * (p->q_lo - p->q_hi));
    /* Rounding in the inverse can step just past a truncation bound. */
    return fmin(p->upper, fmax(p->lower, x));
}

double tf_prior_draw(const tf_prior *p, tf_rng *rng) { return tf_prior_quantile(p, tf_rng_uniform(rng)); }

tf_status tf_prior_rescale(const tf_prior *p, double factor, tf_prior *out, tf_error *err)
{
    if (!(factor > 0 && factor < INFINITY))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "a prior's scale factor must be positive, got %g",
                            factor);
    if (!kind_ok(p->kind))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "unknown prior distribution (%d)", (int)p->kind);
    double par[TF_PRIOR_MAX_PAR];
    memcpy(par, p->par, sizeof par);
    switch (p->kind) {
    case TF_PRIOR_NORMAL:
    case TF_PRIOR_LOGNORMAL:
    case TF_PRIOR_STUDENT_T:
        par[1] *= factor;
        break;
    case TF_PRIOR_HALFNORMAL:
        par[0] *= factor;
        break;
    case TF_PRIOR_GAMMA:
        par[1] /= factor;
        break;
    case TF_PRIOR_UNIFORM: {
        double mid = 0.5 * (par[0] + par[1]), half = 0.5 * (par[1] - par[0]) * factor;
        par[0] = mid - half;
        par[1] = mid + half;
        break;
    }
    default:
        break;
    }
    return tf_prior_init(out, p->kind, par, p->trunc_lo, p->trunc_hi, err);
}

/* Appends with snprintf semantics: *len counts what the full text needs. */
static void put(char *buf, size_t size, size_t *len, const char *fmt, double v)
{
    size_t room = *len < size ? size - *len : 0;
    int n = snprintf(room ? buf + *len : NULL, room, fmt, v);
    if (n > 0)
        *len += (size_t)n;
}

static void put_str(char *buf, size_t size, size_t *len, const char *s)
{
    size_t room = *len < size ? size - *len : 0;
    int n = snprintf(room ? buf + *len : NULL, room, "%s", s);
    if (n > 0)
        *len += (size_t)n;
}

size_t tf_prior_describe(const tf_prior *p, char *buf, size_t size)
{
    size_t len = 0;
    if (size)
        buf[0] = '\0';
    if (!kind_ok(p->kind))
        return 0;
    const family *f = &families[p->kind];
    put_str(buf, size, &len, f->name);
    put_str(buf, size, &len, "(");
    for (size_t i = 0; i < f->n_par; i++) {
        put_str(buf, size, &len, i ? ", " : "");
        put_str(buf, size, &len, f->par_names[i]);
        put(buf, size, &len, "=%g", p->par[i]);
    }
    put_str(buf, size, &len, ")");
    double nat_lo, nat_hi;
    f->support(p->par, &nat_lo, &nat_hi);
    if (p->trunc_lo > nat_lo || p->trunc_hi < nat_hi) {
        put_str(buf, size, &len, " truncated to ");
        put_str(buf, size, &len, isinf(p->trunc_lo) ? "(" : "[");
        put(buf, size, &len, "%g, ", p->trunc_lo);
        put(buf, size, &len, "%g", p->trunc_hi);
        put_str(buf, size, &len, isinf(p->trunc_hi) ? ")" : "]");
    }
    return len;
}

struct tf_prior_set {
    size_t n_params;
    char **names;
    double *lower, *upper; /* the model's supports; NULL = unchecked */
    tf_prior *priors;
    unsigned char *assigned;
};

void tf_prior_set_free(tf_prior_set *s)
{
    if (!s)
        return;
    if (s->names)
        for (size_t i = 0; i < s->n_params; i++)
            free(s->names[i]);
    free(s->names);
    free(s->lower);
    free(s->upper);
    free(s->priors);
    free(s->assigned);
    free(s);
}

static char *copy_string(const char *s)
{
    size_t n = strlen(s) + 1;
    char *c = malloc(n);
    if (c)
        memcpy(c, s, n);
    return c;
}

tf_status tf_prior_set_new(size_t n_params, const char *const *names, const double *lower,
                           const double *upper, tf_prior_set **out, tf_error *err)
{
    *out = NULL;
    for (size_t i = 0; i < n_params; i++) {
        if (!names[i] || !names[i][0])
            return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "parameter %zu has no name", i + 1);
        for (size_t j = 0; j < i; j++)
            if (!strcmp(names[i], names[j]))
                return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "parameter name '%s' appears twice",
                                    names[i]);
    }
    tf_prior_set *s = calloc(1, sizeof *s);
    if (!s)
        goto fail;
    size_t n_alloc = n_params ? n_params : 1;
    s->names = calloc(n_alloc, sizeof *s->names);
    s->priors = calloc(n_alloc, sizeof *s->priors);
    s->assigned = calloc(n_alloc, 1);
    if (!s->names || !s->priors || !s->assigned)
        goto fail;
    s->n_params = n_params;
    for (size_t i = 0; i < n_params; i++)
        if (!(s->names[i] = copy_string(names[i])))
            goto fail;
    if (lower && upper) {
        s->lower = malloc(n_alloc * sizeof *s->lower);
        s->upper = malloc(n_alloc * sizeof *s->upper);
        if (!s->lower || !s->upper)
            goto fail;
        memcpy(s->lower, lower, n_params * sizeof *lower);
        memcpy(s->upper, upper, n_params * sizeof *upper);
    }
    *out = s;
    return TF_OK;
fail:
    tf_prior_set_free(s);
    return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for a prior set");
}

tf_status tf_prior_set_copy(const tf_prior_set *s, tf_prior_set **out, tf_error *err)
{
    tf_status st = tf_prior_set_new(s->n_params, (const char *const *)s->names, s->lower, s->upper, out, err);
    if (st != TF_OK)
        return st;
    memcpy((*out)->priors, s->priors, s->n_params * sizeof *s->priors);
    memcpy((*out)->assigned, s->assigned, s->n_params);
    return TF_OK;
}

size_t tf_prior_set_n_params(const tf_prior_set *s) { return s->n_params; }

const char *tf_prior_set_name(const tf_prior_set *s, size_t i) { return i < s->n_params ? s->names[i] : NULL; }

int tf_prior_set_index(const tf_prior_set *s, const char *name)
{
    for (size_t i = 0; i < s->n_params; i++)
        if (!strcmp(s->names[i], name))
            return (int)i;
    return -1;
}

tf_status tf_prior_set_assign(tf_prior_set *s, const char *name, const tf_prior *p, tf_error *err)
{
    int i = tf_prior_set_index(s, name);
    if (i < 0) {
        char known[256] = "";
        size_t len = 0;
        for (size_t j = 0; j < s->n_params; j++) {
            put_str(known, sizeof known, &len, j ? ", " : "its parameters are ");
            put_str(known, sizeof known, &len, s->names[j]);
        }
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, known, "the model has no parameter '%s'", name);
    }
    if (s->lower && (p->lower < s->lower[i] || p->upper > s->upper[i])) {
        char what[160], hint[256];
        tf_prior_describe(p, what, sizeof what);
        snprintf(hint, sizeof hint, "truncate the prior to the model's range (lower = %g, upper = %g in a model file)",
                 s->lower[i], s->upper[i]);
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, hint,
                            "the prior for %s, %s, allows values in [%g, %g] but %s must lie in (%g, %g)", name, what,
                            p->lower, p->upper, name, s->lower[i], s->upper[i]);
    }
    s->priors[i] = *p;
    s->assigned[i] = 1;
    return TF_OK;
}

const tf_prior *tf_prior_set_prior(const tf_prior_set *s, size_t i)
{
    return i < s->n_params && s->assigned[i] ? &s->priors[i] : NULL;
}

tf_status tf_prior_set_check_complete(const tf_prior_set *s, tf_error *err)
{
    tf_status st = TF_OK;
    for (size_t i = 0; i < s->n_params; i++)
        if (!s->assigned[i])
            st = tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, "add a section for it to the model file",
                              "no prior was given for parameter '%s'", s->names[i]);
    return st;
}

double tf_prior_set_log_density(const tf_prior_set *s, const double *theta)
{
    double sum = 0;
    for (size_t i = 0; i < s->n_params; i++) {
        if (!s->assigned[i])
            return NAN;
        sum += tf_prior_log_density(&s->priors[i], theta[i]);
    }
    return sum;
}

void tf_prior_set_draw(const tf_prior_set *s, tf_rng *rng, double *theta)
{
    for (size_t i = 0; i < s->n_params; i++)
        theta[i] = s->assigned[i] ? tf_prior_draw(&s->priors[i], rng) : NAN;
}
