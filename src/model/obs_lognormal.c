/* Log-normal counting error: ln y ~ Normal(ln mu, tau), mu = effort * N. The log-likelihood is the
 * density of y itself, so it includes the Jacobian -ln y and is comparable with the count models:
 * log p = -ln y - ln tau - ln(2 pi)/2 - (ln y - ln mu)^2 / (2 tau^2) (Johnson, Kotz & Balakrishnan
 * 1994, Continuous Univariate Distributions vol. 1, eq. 14.2'). Counts of zero are impossible. */
#include <gsl/gsl_randist.h>

#include "model/model_internal.h"

static const char *const names[] = {"tau"};
static const double lower[] = {0.0};
static const double upper[] = {INFINITY};

/* ln(2 pi) / 2. */
#define HALF_LN_2PI 0.91893853320467274178

static void year_const(const double *p, double y, double *c)
{
    const double tau = p[0];
    c[0] = log(y);
    c[1] = -c[0] - log(tau) - HALF_LN_2PI;
    c[2] = -0.5 / (tau * tau);
}

static void add_logweight(const double *p, double y, double log_effort, const double *c,
                          const double *restrict x, double *restrict lw, size_t n)
{
    if (!(y > 0)) {
        /* ln 0 = -inf would meet +inf in c[1]: the density of a zero is simply 0. */
        for (size_t i = 0; i < n; i++)
            lw[i] = -INFINITY;
        return;
    }
    const double a = c[0] - log_effort, k = c[1], q = c[2];
    for (size_t i = 0; i < n; i++) {
        double d = a - x[i];
        lw[i] += k + q * d * d;
    }
}

static double logpmf(const double *p, double y, double mu)
{
    if (!(y > 0) || !(mu > 0) || !(mu < INFINITY))
        return -INFINITY;
    const double tau = p[0], d = (log(y) - log(mu)) / tau;
    return -log(y) - log(tau) - HALF_LN_2PI - 0.5 * d * d;
}

static double draw(const double *p, double mu, gsl_rng *rng)
{
    if (!(mu > 0))
        return 0.0;
    return gsl_ran_lognormal(rng, log(mu), p[0]);
}

/* log p(y | x) = const - (ln y - ln E - x)^2 / (2 tau^2): exactly Gaussian in x with mode
 * ln(y / E) and precision 1 / tau^2 (the density above), so a filter that uses it is fully
 * adapted for a linear growth model (Pitt & Shephard 1999, JASA 94:590, section 3.2). A zero count
 * is impossible here. */
static int pseudo_obs(const double *p, double y, double log_effort, double *mode, double *prec)
{
    const double tau = p[0];
    if (!(y > 0) || !(tau > 0))
        return TF_PSEUDO_NONE;
    *mode = log(y) - log_effort;
    *prec = 1.0 / (tau * tau);
    return TF_PSEUDO_EXACT;
}

static void dlogp(const double *p, double y, double log_effort, double x, double *d1, double *d2)
{
    const double prec = 1.0 / (p[0] * p[0]);
    *d1 = prec * (log(y) - log_effort - x);
    *d2 = -prec;
}

const tf_obs_type tf_obs_lognormal = {
    "lognormal", "log-normal", 1, names, lower, upper, 0, 1, 3, year_const, add_logweight, logpmf, draw, pseudo_obs,
    dlogp,
};
