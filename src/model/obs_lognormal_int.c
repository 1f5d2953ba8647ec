/* Log-normal counting error for whole counts: an underlying amount Y with ln Y ~ Normal(ln mu,
 * tau), mu = effort * N, is reported rounded to the nearest whole number, so a count y has the
 * probability of its rounding interval,
 *   P(y) = Phi((ln(y + 1/2) - ln mu) / tau) - Phi((ln(y - 1/2) - ln mu) / tau),  y >= 1,
 *   P(0) = Phi((ln(1/2) - ln mu) / tau),
 * a probability mass function on 0, 1, 2, ... (the continuous distribution "discretised" by
 * rounding; common practice, no source). Unlike the continuous log-normal density (obs_lognormal.c)
 * it is a probability of the count itself, so its marginal likelihood compares directly with the
 * Poisson and negative-binomial models', and it allows zero counts. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_sf_erf.h>

#include "model/model_internal.h"
#include "model/vector_math.h"

/* 1 / sqrt(2) and ln 2 (the M_ constants are not in C11). */
#define SQRT1_2 0.70710678118654752440
#define LN2 0.69314718055994530942
/* ln(2 pi) / 2. */
#define HALF_LN_2PI 0.91893853320467274178

static const char *const names[] = {"tau"};
static const double lower[] = {0.0};
static const double upper[] = {INFINITY};

/* Below this argument 0.5 erfc(-u / sqrt 2) starts to lose bits to subnormals (erfc(x) is below
 * 1e-300 for x > 26.2), so the log of the lower tail comes from GSL's log erfc instead. */
#define LOG_NDTR_DIRECT_MIN -30.0

/* log Phi(u), the standard normal distribution function, accurate in both tails. */
static inline double log_ndtr(double u)
{
    if (u > 5.0)
        return log1p(-0.5 * erfc(u * SQRT1_2));
    if (u > LOG_NDTR_DIRECT_MIN)
        return log(0.5 * erfc(-u * SQRT1_2));
    if (u == -INFINITY)
        return -INFINITY;
    return gsl_sf_log_erfc(-u * SQRT1_2) - LN2;
}

/* log(1 - exp(d)) for d <= 0, switching at -ln 2 between the two forms that keep full precision
 * (Maechler 2012, "Accurately computing log(1 - exp(-|a|))", the R package Rmpfr's vignette,
 * eq. 7). */
static inline double log1mexp(double d)
{
    return d > -LN2 ? log(-expm1(d)) : log1p(-exp(d));
}

/* log(Phi(b) - Phi(a)) for a <= b (a may be -inf, b +inf). Differences of two upper tails are
 * taken as the mirror image, lower tails, so that neither underflows to 0 - 0; an interval
 * around 0 is 1 minus two tails that are each at most 1/2. -inf for an empty interval. */
static double log_ndtr_diff(double a, double b)
{
    if (a >= 0) {
        double t = a;
        a = -b;
        b = -t;
    }
    if (b <= 0) {
        double lb = log_ndtr(b);
        if (lb == -INFINITY || !(a < b))
            return -INFINITY;
        return lb + log1mexp(log_ndtr(a) - lb);
    }
    return log1p(-0.5 * (erfc(-a * SQRT1_2) + erfc(b * SQRT1_2)));
}

/* c[0] = ln(y - 1/2) (-inf for y = 0), c[1] = ln(y + 1/2), c[2] = 1 / tau, c[3] = the
 * interval's width in sd units, w = (c[1] - c[0]) / tau (inf for y = 0). */
static void year_const(const double *p, double y, double *c)
{
    c[0] = y >= 1 ? log(y - 0.5) : -INFINITY;
    c[1] = log(y + 0.5);
    c[2] = 1.0 / p[0];
    c[3] = (c[1] - c[0]) * c[2];
}

/* For a narrow interval (large counts, the usual case) the probability comes from the Taylor
 * series of the integral of the normal density phi about the interval's midpoint m (in sd
 * units), term by term integrated over [m - w/2, m + w/2]:
 *   P = w phi(m) [1 + w^2 He2(m) / 24 + w^4 He4(m) / 1920 + w^6 He6(m) / 322560
 *                  + w^8 He8(m) / 92897280 + ...],
 * since phi^(2k) = He_2k phi with the Hermite polynomials He2 = m^2 - 1, He4 = m^4 - 6 m^2 + 3,
 * He6 = m^6 - 15 m^4 + 45 m^2 - 15, He8 = m^8 - 28 m^6 + 210 m^4 - 420 m^2 + 105
 * (Abramowitz & Stegun 1964, chapters 22 and 26; recalled from memory, and checked against
 * the exact difference in the unit test); integrating t^2k / (2k)! over [-w/2, w/2] gives the
 * coefficients 1 / (4^k (2k + 1)!). The first omitted term is w^10 He10(m) / 40874803200;
 * for w <= SERIES_MAX_W and w |m| <= SERIES_MAX_U it is under 3e-14 relative (|He10(m)| is
 * at most 945 for |m| < 1 and below m^10 beyond), at the cost of one log1p per particle
 * instead of two erfc, two logs and an exp. Outside, the exact difference. */
#define SERIES_MAX_W 0.2
#define SERIES_MAX_U 0.5

static void add_logweight(const double *p, double y, double log_effort, const double *c,
                          const double *restrict x, double *restrict lw, size_t n)
{
    const double lo = c[0] - log_effort, hi = c[1] - log_effort, inv_tau = c[2], w = c[3];
    double m_max = 0;
    if (w <= SERIES_MAX_W) {
        const double mid = 0.5 * (lo + hi), k0 = log(w) - HALF_LN_2PI, w2 = w * w;
        const double c2 = w2 / 24.0, c4 = w2 * w2 / 1920.0, c6 = w2 * w2 * w2 / 322560.0;
        const double c8 = w2 * w2 * w2 * w2 / 92897280.0;
        m_max = SERIES_MAX_U / w;
        for (size_t i = 0; i < n; i++) {
            double m = (mid - x[i]) * inv_tau, m2 = m * m;
            double s = c2 * (m2 - 1.0) + c4 * ((m2 - 6.0) * m2 + 3.0) + c6 * (((m2 - 15.0) * m2 + 45.0) * m2 - 15.0) +
                       c8 * ((((m2 - 28.0) * m2 + 210.0) * m2 - 420.0) * m2 + 105.0);
            /* A select, so that the loop vectorises; the far particles are done below. */
            lw[i] += fabs(m) <= m_max ? k0 - 0.5 * m2 + log1p(s) : 0.0;
        }
    }
    for (size_t i = 0; i < n; i++) {
        if (m_max > 0 && fabs((0.5 * (lo + hi) - x[i]) * inv_tau) <= m_max)
            continue;
        /* An extinct particle (x = -inf) makes both ends +inf: probability 0 of a positive count
         * and, since lo = -inf for y = 0, probability 1 of a zero. */
        double a = lo == -INFINITY ? -INFINITY : (lo - x[i]) * inv_tau;
        lw[i] += log_ndtr_diff(a, (hi - x[i]) * inv_tau);
    }
}

static double logpmf(const double *p, double y, double mu)
{
    if (!(y >= 0) || y != floor(y) || !(mu >= 0) || !(mu < INFINITY))
        return -INFINITY;
    if (mu == 0)
        return y == 0 ? 0.0 : -INFINITY;
    const double tau = p[0], lmu = log(mu);
    double a = y >= 1 ? (log(y - 0.5) - lmu) / tau : -INFINITY;
    return log_ndtr_diff(a, (log(y + 0.5) - lmu) / tau);
}

/* Rounding half up puts Y in [y - 1/2, y + 1/2) on y, as the probability above assumes. */
static double draw(const double *p, double mu, gsl_rng *rng)
{
    if (!(mu > 0))
        return 0.0;
    return floor(gsl_ran_lognormal(rng, log(mu), p[0]) + 0.5);
}

/* As a function of x, P(y | x) = Phi((h - x) / tau) - Phi((l - x) / tau) with l = ln(y - 1/2) - ln E,
 * h = ln(y + 1/2) - ln E: the density of x - U at 0, U uniform on [l, h], convolved with the
 * normal of sd tau, i.e. the likelihood of a normal observation of x blurred by a uniform of width
 * w = h - l. Its Gaussian approximation matches the two moments: mode (l + h) / 2 and variance
 * tau^2 + w^2 / 12 (the variance of the uniform added to the normal's; moment matching, common
 * practice, no source). For y >= 1 this tends to the continuous log-normal's ln(y / E), 1 / tau^2
 * as y grows (w ~ 1 / y); for small counts the interval's width widens it (at y = 1, w = ln 3).
 * A zero count has l = -inf: P(0 | x) is a one-sided step in x with no mode, no information. */
static int pseudo_obs(const double *p, double y, double log_effort, double *mode, double *prec)
{
    const double tau = p[0];
    if (!(y >= 1) || !(tau > 0))
        return TF_PSEUDO_NONE;
    const double l = log(y - 0.5), h = log(y + 0.5), w = h - l;
    *mode = 0.5 * (l + h) - log_effort;
    *prec = 1.0 / (tau * tau + w * w / 12.0);
    return TF_PSEUDO_APPROX;
}

/* The moment-matched Gaussian's derivatives: the exact ones of a difference of normal
 * distribution functions cost two erfc and lose precision far in the tails, and the matched
 * Gaussian is already close to the exact likelihood in x (a normal blurred by a narrow uniform). */
static void dlogp(const double *p, double y, double log_effort, double x, double *d1, double *d2)
{
    double mode = x, prec = 0;
    if (pseudo_obs(p, y, log_effort, &mode, &prec) == TF_PSEUDO_NONE) {
        *d1 = *d2 = NAN;
        return;
    }
    *d1 = prec * (mode - x);
    *d2 = -prec;
}

const tf_obs_type tf_obs_lognormal_int = {
    "lognormal-int", "log-normal, rounded to whole counts", 1, names, lower, upper, 1, 0, 4, year_const,
    add_logweight, logpmf, draw, pseudo_obs, dlogp,
};
