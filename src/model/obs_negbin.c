/* Negative-binomial counting error with mean mu = effort * N and size phi, variance
 * mu + mu^2 / phi (the NB2 form, Hilbe 2011, Negative Binomial Regression, 2nd ed., eq. 8.5):
 * log p = ln G(y + phi) - ln G(phi) - ln y! + y ln mu + phi ln phi - (y + phi) ln(phi + mu),
 * computed as  ... - y ln phi - (y + phi) ln1p(mu / phi)  so that large phi (near-Poisson) keeps
 * its precision. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_sf_gamma.h>

#include "model/model_internal.h"
#include "model/vector_math.h"

static const char *const names[] = {"phi"};
static const double lower[] = {0.0};
static const double upper[] = {INFINITY};

static void year_const(const double *p, double y, double *c)
{
    const double phi = p[0];
    c[0] = gsl_sf_lngamma(y + phi) - gsl_sf_lngamma(phi) - gsl_sf_lngamma(y + 1.0) - y * log(phi);
    c[1] = y + phi;
    c[2] = 1.0 / phi;
}

static void add_logweight(const double *p, double y, double log_effort, const double *c,
                          const double *restrict x, double *restrict lw, size_t n)
{
    const double k1 = c[1], inv_phi = c[2];
    if (y == 0) {
        /* Kept apart so that 0 * x never meets x = -inf, which gives NaN (c[0] is 0 here). */
        for (size_t i = 0; i < n; i++)
            lw[i] -= k1 * log1p(exp(x[i] + log_effort) * inv_phi);
        return;
    }
    const double k0 = c[0] + y * log_effort;
    for (size_t i = 0; i < n; i++)
        lw[i] += k0 + y * x[i] - k1 * log1p(exp(x[i] + log_effort) * inv_phi);
}

static double logpmf(const double *p, double y, double mu)
{
    const double phi = p[0];
    if (mu == 0)
        return y == 0 ? 0.0 : -INFINITY;
    if (!(mu < INFINITY))
        return -INFINITY;
    double lp = gsl_sf_lngamma(y + phi) - gsl_sf_lngamma(phi) - gsl_sf_lngamma(y + 1.0) - (y + phi) * log1p(mu / phi);
    if (y > 0)
        lp += y * (log(mu) - log(phi));
    return lp;
}

/* The gamma-Poisson mixture (Greenwood & Yule 1920, J. R. Stat. Soc. 83:255): lambda ~
 * Gamma(shape phi, scale mu / phi), y ~ Poisson(lambda). */
static double draw(const double *p, double mu, gsl_rng *rng)
{
    if (!(mu > 0))
        return 0.0;
    const double phi = p[0];
    return tf_obs_poisson_count(gsl_ran_gamma(rng, phi, mu / phi), rng);
}

const tf_obs_type tf_obs_negbin = {
    "negbin", "negative binomial", 1, names, lower, upper, 1, 0, 3, year_const, add_logweight, logpmf, draw,
};
