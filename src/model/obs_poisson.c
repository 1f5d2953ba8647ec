/* Poisson counting error: y ~ Poisson(mu), mu = effort * N, log p = y ln mu - mu - ln y!
 * (the observation model of Dennis, Ponciano, Lele, Taper & Staples 2006, Ecol. Monogr. 76:323,
 * Sect. "Poisson sampling"). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_sf_gamma.h>

#include "model/model_internal.h"
#include "model/vector_math.h"

/* Above this mean gsl_ran_poisson's unsigned int result could overflow; the normal
 * approximation's relative error there (skewness mu^-1/2 < 3.2e-5) is far below one animal in
 * a thousand (common practice, no source). */
#define POISSON_NORMAL_ABOVE 1e9

double tf_obs_poisson_count(double lambda, gsl_rng *rng)
{
    if (!(lambda > 0))
        return 0.0;
    if (lambda > POISSON_NORMAL_ABOVE) {
        double y = round(lambda + sqrt(lambda) * gsl_ran_gaussian_ziggurat(rng, 1.0));
        return y > 0 ? y : 0.0;
    }
    return (double)gsl_ran_poisson(rng, lambda);
}

/* ln y! by GSL rather than lgamma, which writes the global signgam (filters run in threads). */
static void year_const(const double *p, double y, double *c)
{
    c[0] = -gsl_sf_lngamma(y + 1.0);
}

static void add_logweight(const double *p, double y, double log_effort, const double *c,
                          const double *restrict x, double *restrict lw, size_t n)
{
    if (y == 0) {
        /* Kept apart so that 0 * x never meets x = -inf (an extinct particle), which gives NaN. */
        for (size_t i = 0; i < n; i++)
            lw[i] -= exp(x[i] + log_effort);
        return;
    }
    const double k = c[0] + y * log_effort;
    for (size_t i = 0; i < n; i++)
        lw[i] += y * x[i] + k - exp(x[i] + log_effort);
}

static double logpmf(const double *p, double y, double mu)
{
    if (mu == 0)
        return y == 0 ? 0.0 : -INFINITY;
    if (!(mu < INFINITY))
        return -INFINITY;
    if (y == 0)
        return -mu;
    return y * log(mu) - mu - gsl_sf_lngamma(y + 1.0);
}

static double draw(const double *p, double mu, gsl_rng *rng) { return tf_obs_poisson_count(mu, rng); }

/* In x = ln N, with mu = E e^x: l(x) = y (x + ln E) - E e^x - ln y!, l'(x) = y - mu, l''(x) = -mu.
 * The mode is mu = y, i.e. x = ln(y / E), where the precision -l'' is y (Laplace's approximation,
 * Tierney & Kadane 1986; the same Gaussian as the delta-method variance 1/y of ln y, common
 * practice, no source). A zero count makes l strictly decreasing in x: no mode, no information of
 * this form (the filter then moves blind and weights by the exact density). */
static int pseudo_obs(const double *p, double y, double log_effort, double *mode, double *prec)
{
    if (!(y > 0))
        return TF_PSEUDO_NONE;
    *mode = log(y) - log_effort;
    *prec = y;
    return TF_PSEUDO_APPROX;
}

static void dlogp(const double *p, double y, double log_effort, double x, double *d1, double *d2)
{
    const double mu = exp(x + log_effort);
    *d1 = y - mu;
    *d2 = -mu;
}

const tf_obs_type tf_obs_poisson = {
    "poisson", "Poisson", 0, NULL, NULL, NULL, 1, 0, 1, year_const, add_logweight, logpmf, draw, pseudo_obs, dlogp,
};
