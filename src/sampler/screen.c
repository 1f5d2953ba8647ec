/* The extended Kalman filter that screens proposals; see screen.h. */
#include "sampler/screen.h"

#include <math.h>
#include <stdlib.h>

struct tf_screen {
    const tf_model *m;
    const double *y;          /* n_years; NAN = not surveyed */
    double *log_effort;       /* n_years */
    size_t n_years;
    const tf_series *s;       /* borrowed: removals and releases between the years */
};

static const double LOG_2PI = 1.8378770664093453;

tf_screen *tf_screen_alloc(const tf_model *m, const tf_series *s)
{
    tf_screen *sc = calloc(1, sizeof *sc);
    if (!sc)
        return NULL;
    sc->m = m;
    sc->n_years = tf_series_n_years(s);
    sc->y = tf_series_counts(s);
    sc->s = s;
    sc->log_effort = malloc(sc->n_years * sizeof *sc->log_effort);
    if (!sc->log_effort) {
        free(sc);
        return NULL;
    }
    const double *e = tf_series_effort(s);
    for (size_t t = 0; t < sc->n_years; t++)
        sc->log_effort[t] = log(e[t]);
    return sc;
}

void tf_screen_free(tf_screen *sc)
{
    if (!sc)
        return;
    free(sc->log_effort);
    free(sc);
}

/* Step of the numerical derivative of the drift: central differences with h near the cube root
 * of the machine epsilon times the scale of x balance truncation against rounding (Press et al.,
 * Numerical Recipes, 3rd ed., section 5.7). */
#define DERIV_REL 6e-6

double tf_screen_loglik(tf_screen *sc, const double *theta)
{
    const tf_model *m = sc->m;
    if (tf_model_check_params(m, theta, NULL) != TF_OK)
        return -INFINITY;
    const tf_growth_type *g = tf_model_growth(m);
    const tf_obs_type *o = tf_model_obs(m);
    const double *p_growth = theta, sigma = theta[g->n_params], *p_obs = theta + g->n_params + 1;
    /* The state x_t ~ N(mean, var) given the counts before t: x_1 from its prior. */
    double mean = tf_model_x1_mean(m), var = tf_model_x1_sd(m) * tf_model_x1_sd(m), ll = 0.0;
    for (size_t t = 0; t < sc->n_years; t++) {
        double y = sc->y[t];
        if (!isnan(y)) {
            double mode, prec;
            if (o->pseudo_obs(p_obs, y, sc->log_effort[t], &mode, &prec) != TF_PSEUDO_NONE &&
                prec > 0 && isfinite(prec) && isfinite(mode)) {
                /* Laplace: p(y | x) ~ p(y | mode) exp(-prec (x - mode)^2 / 2), so
                 * p(y | earlier counts) ~ p(y | mode) sqrt(2 pi / prec) N(mode; mean, var + 1/prec),
                 * and the update is the Kalman filter's with observation mode and variance
                 * 1 / prec (the extended Kalman filter's measurement step, Jazwinski 1970,
                 * chapter 8, with an identity measurement on the log scale). */
                double r = 1.0 / prec, s = var + r, d = mode - mean;
                ll += o->logpmf(p_obs, y, exp(mode + sc->log_effort[t])) + 0.5 * (LOG_2PI - log(prec)) -
                      0.5 * (LOG_2PI + log(s) + d * d / s);
                double k = var / s;
                mean += k * d;
                var = var * r / s;
            } else {
                /* No interior mode (a zero count under a count model): the count's probability at
                 * the expected abundance, and no update (the count only says "few"). */
                ll += o->logpmf(p_obs, y, exp(mean + 0.5 * var + sc->log_effort[t]));
            }
        }
        if (t + 1 == sc->n_years)
            break;
        /* Prediction: x' = drift(x) + sigma eps, linearised at the mean (first-order extended
         * Kalman filter); a removal or release acts first, x -> ln(e^x - take), so the
         * linearisation is of the two steps together. */
        double h = DERIV_REL * fmax(1.0, fabs(mean)), xs[3] = {mean - h, mean, mean + h}, fx[3];
        if (tf_series_has_actions(sc->s)) {
            tf_model_take(tf_series_take(sc->s, t), xs, 3);
            tf_model_drift_alive(g, p_growth, xs, fx, 3);
        } else {
            g->drift(p_growth, xs, fx, 3);
        }
        double a = (fx[2] - fx[0]) / (2.0 * h);
        mean = fx[1];
        var = a * a * var + sigma * sigma;
        if (!isfinite(mean) || !(var > 0) || !isfinite(var))
            return TF_SCREEN_FLOOR;
    }
    return isfinite(ll) && ll > TF_SCREEN_FLOOR ? ll : TF_SCREEN_FLOOR;
}
