/* Exact likelihood of a linear-Gaussian state-space model by the Kalman filter, as the reference
 * the particle filter's PMMH posterior is checked against. The Gompertz model on log scale,
 * x_{t+1} = alpha + beta x_t + sigma eps_t, observed with log-normal error,
 * log y_t = x_t + log E_t + c + tau e_t, is such a model (Dennis, Ponciano, Lele, Taper & Staples
 * 2006, Ecological Monographs 76:323, eqs. 9-12). Header-only: included by the tests that use it. */
#ifndef TF_KALMAN_REF_H
#define TF_KALMAN_REF_H

#include <math.h>
#include <stddef.h>

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
static double kalman_loglik(const double *l, const double *d, size_t n_years, double alpha,
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

#endif
