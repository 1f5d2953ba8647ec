/* The prior side of the sampler's target on the unconstrained scale; see posterior.h. */
#include "sampler/posterior.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

struct tf_posterior {
    const tf_model *model;
    const tf_prior_set *priors;
    size_t dim;
    tf_transform tr[TF_MAX_PARAMS];
    double lower[TF_MAX_PARAMS], upper[TF_MAX_PARAMS];   /* the model's open supports */
};

tf_status tf_posterior_new(const tf_model *m, const tf_prior_set *priors, tf_posterior **out,
                           tf_error *err)
{
    *out = NULL;
    size_t d = tf_model_n_params(m);
    if (tf_prior_set_n_params(priors) != d)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "the prior set has %zu parameters, the model %s has %zu",
                            tf_prior_set_n_params(priors), tf_model_name(m), d);
    tf_status st = tf_prior_set_check_complete(priors, err);
    if (st != TF_OK)
        return st;
    tf_posterior *p = calloc(1, sizeof *p);
    if (!p)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
    p->model = m;
    p->priors = priors;
    p->dim = d;
    for (size_t i = 0; i < d; i++) {
        if (strcmp(tf_prior_set_name(priors, i), tf_model_param_name(m, i)) != 0) {
            st = tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                              "prior %zu is for '%s' but the model's parameter %zu is '%s'", i + 1,
                              tf_prior_set_name(priors, i), i + 1, tf_model_param_name(m, i));
            goto fail;
        }
        const tf_prior *pr = tf_prior_set_prior(priors, i);
        p->lower[i] = tf_model_param_lower(m, i);
        p->upper[i] = tf_model_param_upper(m, i);
        /* The prior's support lies inside the model's (tf_prior_set_assign checks it) and may be
         * narrower (a truncated prior): map onto the narrower one so no move leaves it. */
        double lo = pr->lower > p->lower[i] ? pr->lower : p->lower[i];
        double hi = pr->upper < p->upper[i] ? pr->upper : p->upper[i];
        if ((st = tf_transform_init(&p->tr[i], lo, hi, err)) != TF_OK)
            goto fail;
    }
    *out = p;
    return TF_OK;
fail:
    free(p);
    return st;
}

void tf_posterior_free(tf_posterior *p) { free(p); }

size_t tf_posterior_dim(const tf_posterior *p) { return p->dim; }
const tf_model *tf_posterior_model(const tf_posterior *p) { return p->model; }
const tf_prior_set *tf_posterior_priors(const tf_posterior *p) { return p->priors; }

double tf_posterior_log_prior(const tf_posterior *p, const double *theta)
{
    for (size_t i = 0; i < p->dim; i++)
        if (!(theta[i] > p->lower[i] && theta[i] < p->upper[i]))
            return -INFINITY;
    double lp = tf_prior_set_log_density(p->priors, theta);
    return isnan(lp) ? -INFINITY : lp;
}

double tf_posterior_log_prior_z(const tf_posterior *p, const double *z, double *theta)
{
    /* Change of variables: the density of z is that of theta(z) times |d theta / d z|. */
    double log_jac = tf_transform_to_natural(p->tr, p->dim, z, theta);
    double lp = tf_posterior_log_prior(p, theta);
    if (!isfinite(lp) || !isfinite(log_jac))
        return -INFINITY;
    return lp + log_jac;
}

int tf_posterior_to_z(const tf_posterior *p, const double *theta, double *z)
{
    if (!isfinite(tf_posterior_log_prior(p, theta)))
        return 0;
    tf_transform_to_unconstrained(p->tr, p->dim, theta, z);
    for (size_t i = 0; i < p->dim; i++)
        if (!isfinite(z[i]))
            return 0;
    return 1;
}

void tf_posterior_draw(const tf_posterior *p, tf_rng *rng, double *theta, double *z)
{
    /* A draw can land on an end of the support (a half-normal's 0 after rounding), where z is
     * infinite; such draws have probability zero in exact arithmetic and are drawn again. */
    for (int tries = 0; tries < 1000; tries++) {
        tf_prior_set_draw(p->priors, rng, theta);
        if (tf_posterior_to_z(p, theta, z))
            return;
    }
    /* Unreachable for proper priors; fall back to the prior medians. */
    for (size_t i = 0; i < p->dim; i++)
        theta[i] = tf_prior_quantile(tf_prior_set_prior(p->priors, i), 0.5);
    tf_transform_to_unconstrained(p->tr, p->dim, theta, z);
}
