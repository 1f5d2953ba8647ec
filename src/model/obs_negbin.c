/* Negative-binomial counting error with mean mu = effort * N and size phi, variance
 * mu + mu^2 / phi (the NB2 form, Hilbe 2011, Negative Binomial Regression, 2nd ed., eq. 8.5):
 * log p = ln G(y + phi) - ln G(phi) - ln y! + y ln mu + phi ln phi - (y + phi) ln(phi + mu),
 * computed as  ... - y ln phi - (y + phi) ln1p(mu / phi)  so that large phi (near-Poisson) keeps
 * its precision (and the gamma terms as lngamma_ratio below, for the same reason). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_sf_gamma.h>

#include "model/model_internal.h"
#include "model/vector_math.h"

static const char *const names[] = {"phi"};
static const double lower[] = {0.0};
static const double upper[] = {INFINITY};

/* Above this size, ln G(y + phi) - ln G(phi) is taken from Stirling's series: the difference of
 * two values near phi ln phi would keep only about 16 - log10(phi ln phi) digits (none at all
 * beyond phi = 1e15, where y + phi rounds to phi), which made the likelihood of a near-Poisson
 * fit collapse instead of approaching the Poisson limit. At 1e4 the direct form is still good to
 * about 1e-12 and the series' first omitted term, 1 / (360 phi^3), is below 3e-15. */
#define STIRLING_ABOVE 1e4

/* ln G(y + phi) - ln G(phi) - y ln phi, accurate for every phi > 0. For large phi, Stirling's
 * series ln G(z) = (z - 1/2) ln z - z + ln(2 pi)/2 + 1/(12 z) - ... (Abramowitz & Stegun 1964,
 * Handbook of Mathematical Functions, eq. 6.1.41; equation number recalled from memory) at
 * z = phi + y and z = phi gives, with u = y / phi,
 *   phi (ln(1 + u) - u) + (y - 1/2) ln(1 + u) - y / (12 phi (phi + y)),
 * where nothing cancels beyond a few units of y times the rounding error. */
static double lngamma_ratio(double y, double phi)
{
    if (phi <= STIRLING_ABOVE)
        return gsl_sf_lngamma(y + phi) - gsl_sf_lngamma(phi) - y * log(phi);
    const double u = y / phi, l = log1p(u);
    return phi * (l - u) + (y - 0.5) * l - y / (12.0 * phi * (phi + y));
}

static void year_const(const double *p, double y, double *c)
{
    const double phi = p[0];
    c[0] = lngamma_ratio(y, phi) - gsl_sf_lngamma(y + 1.0);
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
    double lp = lngamma_ratio(y, phi) - gsl_sf_lngamma(y + 1.0) - (y + phi) * log1p(mu / phi);
    if (y > 0)
        lp += y * log(mu);
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

/* In x = ln N, mu = E e^x: l(x) = y (x + ln E) - (y + phi) ln(phi + mu) + const, so
 * l'(x) = y - (y + phi) mu / (phi + mu), zero at mu = y, and l''(x) = -(y + phi) phi mu / (phi + mu)^2,
 * which at mu = y is -y phi / (y + phi) (differentiating the log-density above; Laplace's
 * approximation, Tierney & Kadane 1986). As phi grows this tends to the Poisson precision y; for
 * small phi it stays near phi however large the count, since the count then says little more
 * than its order of magnitude. A zero count: l' < 0 everywhere, no mode. */
static int pseudo_obs(const double *p, double y, double log_effort, double *mode, double *prec)
{
    const double phi = p[0];
    if (!(y > 0) || !(phi > 0))
        return TF_PSEUDO_NONE;
    *mode = log(y) - log_effort;
    *prec = y * phi / (y + phi);
    return TF_PSEUDO_APPROX;
}

/* l'(x) and l''(x) as above, at any x; written with s = mu / (phi + mu) so that mu >> phi
 * stays finite. */
static void dlogp(const double *p, double y, double log_effort, double x, double *d1, double *d2)
{
    const double phi = p[0], mu = exp(x + log_effort), s = mu / (phi + mu);
    *d1 = y - (y + phi) * s;
    *d2 = -(y + phi) * s * (1.0 - s);
}

const tf_obs_type tf_obs_negbin = {
    "negbin", "negative binomial", 1, names, lower, upper, 1, 0, 3, year_const, add_logweight, logpmf, draw,
    pseudo_obs, dlogp,
};
