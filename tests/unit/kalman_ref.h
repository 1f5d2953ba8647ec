/* Exact likelihood of a linear-Gaussian state-space model by the Kalman filter, as the reference
 * the particle filter's PMMH posterior is checked against. The Gompertz model on log scale,
 * x_{t+1} = alpha + beta x_t + sigma eps_t, observed with log-normal error,
 * log y_t = x_t + log E_t + c + tau e_t, is such a model (Dennis, Ponciano, Lele, Taper & Staples
 * 2006, Ecological Monographs 76:323, eqs. 9-12). Header-only: included by the tests that use it
 * and by the benchmark that compares PMMH's efficiency with an exact-likelihood sampler
 * (bench/bench_fit.c), so that both run the same reference. */
#ifndef TF_KALMAN_REF_H
#define TF_KALMAN_REF_H

#include <math.h>
#include <stddef.h>
#include <string.h>

#include "model/model.h"
#include "sampler/posterior.h"
#include "survey/series.h"
#include "util/rng.h"

/* Log-likelihood of the surveyed log counts l[t] (NAN = not surveyed) up to a constant that does
 * not depend on the parameters: sum over surveyed t of log N(l_t; m_t + d_t, P_t + tau^2), with
 * m_t, P_t the one-step predicted state mean and variance and d_t = log E_t + c: the
 * prediction-error decomposition (Harvey 1989, Forecasting, Structural Time Series Models and the
 * Kalman Filter, section 3.4; recalled from memory, so the test also checks this function against
 * the multivariate normal density of the whole series). x_1 ~ N(m1, s1^2). */
#define KALMAN_MAX_YEARS 200

/* If smooth is not NULL it receives the smoothed means E[x_t | all counts] for t < n_years by
 * the Rauch-Tung-Striebel recursion (Rauch, Tung & Striebel 1965, AIAA Journal 3:1445).
 * n_years <= KALMAN_MAX_YEARS. */
static inline double kalman_loglik(const double *l, const double *d, size_t n_years, double alpha,
                                   double beta, double sigma, double tau, double m1, double s1,
                                   double *smooth)
{
    const double log_2pi = 1.8378770664093453;
    double mp[KALMAN_MAX_YEARS], pp[KALMAN_MAX_YEARS], mf[KALMAN_MAX_YEARS], pf[KALMAN_MAX_YEARS];
    double m = m1, p = s1 * s1, ll = 0.0;
    for (size_t t = 0; t < n_years; t++) {
        mp[t] = m;
        pp[t] = p;
        if (!isnan(l[t])) {
            double f = p + tau * tau;        /* innovation variance */
            double v = l[t] - (m + d[t]);    /* innovation */
            ll += -0.5 * (log_2pi + log(f) + v * v / f);
            double k = p / f;                /* Kalman gain */
            m += k * v;
            p *= 1.0 - k;
        }
        mf[t] = m;
        pf[t] = p;
        m = alpha + beta * m;
        p = beta * beta * p + sigma * sigma;
    }
    if (smooth) {
        smooth[n_years - 1] = mf[n_years - 1];
        for (size_t t = n_years - 1; t-- > 0;) {
            double j = pf[t] * beta / pp[t + 1];
            smooth[t] = mf[t] + j * (smooth[t + 1] - mp[t + 1]);
        }
    }
    return ll;
}

/* The exact-likelihood target of a Gompertz + log-normal posterior in the form a tf_chain takes
 * (sampler/chain.h): the prior side from the same tf_posterior PMMH uses (so the priors and the
 * transforms are the same), the likelihood from kalman_loglik. The chain's "path" is the Kalman
 * smoother's means, so that a latent mean computed from it is Rao-Blackwellised (Gelfand & Smith
 * 1990, section 2.2). One per chain: the smoother writes into it. */
typedef struct {
    const tf_posterior *post;
    size_t n_years;
    double l[KALMAN_MAX_YEARS], d[KALMAN_MAX_YEARS], smooth[KALMAN_MAX_YEARS];
} kalman_target;

/* Fills k for posterior post (its model must be Gompertz + log-normal; post borrowed) and series
 * s: log counts (NAN where not surveyed) and log effort. 0 when s has more than KALMAN_MAX_YEARS
 * years. */
static inline int kalman_target_init(kalman_target *k, const tf_posterior *post, const tf_series *s)
{
    size_t n = tf_series_n_years(s);
    if (n > KALMAN_MAX_YEARS)
        return 0;
    memset(k, 0, sizeof *k);
    k->post = post;
    k->n_years = n;
    const double *y = tf_series_counts(s), *eff = tf_series_effort(s);
    for (size_t t = 0; t < n; t++) {
        k->l[t] = isnan(y[t]) ? NAN : log(y[t]);
        k->d[t] = log(eff[t]);
    }
    return 1;
}

/* tf_chain_target.log_prior */
static inline double kalman_target_log_prior(void *ctx, const double *z, double *theta)
{
    const kalman_target *k = ctx;
    return tf_posterior_log_prior_z(k->post, z, theta);
}

/* tf_chain_target.log_lik. theta = (r, K, sigma, tau). The Gompertz drift is affine in x, so its
 * two coefficients are read off the model's own drift function rather than restated here. */
static inline double kalman_target_log_lik(void *ctx, const double *theta, const double *aux, tf_rng *rng,
                                           double *path)
{
    kalman_target *k = ctx;
    (void)aux;
    (void)rng;
    const tf_model *m = tf_posterior_model(k->post);
    double x[2] = {0.0, 1.0}, out[2];
    tf_model_growth(m)->drift(theta, x, out, 2);
    double alpha = out[0], beta = out[1] - out[0];
    double ll = kalman_loglik(k->l, k->d, k->n_years, alpha, beta, theta[2], theta[3], tf_model_x1_mean(m),
                              tf_model_x1_sd(m), path ? k->smooth : NULL);
    if (path)
        memcpy(path, k->smooth, k->n_years * sizeof(double));
    return ll;
}

#endif
