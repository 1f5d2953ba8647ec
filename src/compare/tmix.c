/* Mixtures of multivariate Student-t distributions: density, draws and weighted moments. */
#include "compare/tmix.h"

#include <math.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_sf_gamma.h>

/* ln(pi). */
#define LN_PI 1.14472988584940017414

tf_status tf_tmix_init(tf_tmix *q, size_t dim, tf_error *err)
{
    memset(q, 0, sizeof *q);
    if (dim < 1 || dim > TF_TMIX_MAX_DIM)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "an importance density needs 1 to %d dimensions, not %zu", TF_TMIX_MAX_DIM, dim);
    q->dim = dim;
    return TF_OK;
}

tf_status tf_tmix_add(tf_tmix *q, double weight, double nu, const double *mean, const double *cov,
                      double scale, tf_error *err)
{
    const size_t d = q->dim;
    if (q->n_comp >= TF_TMIX_MAX_COMP || d == 0)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "the importance mixture is full or empty");
    if (!(weight > 0 && weight <= 1) || !(nu > 0 && nu < INFINITY) || !(scale > 0 && scale < INFINITY))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "unusable importance component: weight %g, degrees of freedom %g, scale %g", weight,
                            nu, scale);
    size_t c = q->n_comp;
    double *l = q->chol[c];
    for (size_t i = 0; i < d * d; i++)
        l[i] = scale * cov[i];
    gsl_matrix_view mv = gsl_matrix_view_array(l, d, d);
    if (gsl_linalg_cholesky_decomp1(&mv.matrix) != GSL_SUCCESS)
        return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0, "the draws may be all equal in some parameter",
                            "the covariance of an importance component is not positive definite");
    double log_det_half = 0;
    for (size_t i = 0; i < d; i++) {
        for (size_t j = i + 1; j < d; j++)
            l[i * d + j] = 0; /* decomp1 leaves L' above the diagonal */
        log_det_half += log(l[i * d + i]);
    }
    memcpy(q->mean[c], mean, d * sizeof *mean);
    q->nu[c] = nu;
    q->log_w[c] = log(weight);
    q->log_norm[c] = gsl_sf_lngamma(0.5 * (nu + (double)d)) - gsl_sf_lngamma(0.5 * nu) -
                     0.5 * (double)d * (log(nu) + LN_PI) - log_det_half;
    q->n_comp++;
    return TF_OK;
}

tf_status tf_tmix_check(const tf_tmix *q, tf_error *err)
{
    double s = 0;
    for (size_t c = 0; c < q->n_comp; c++)
        s += exp(q->log_w[c]);
    if (q->n_comp == 0 || fabs(s - 1.0) > 1e-9)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "the importance mixture's weights add up to %g, not 1", s);
    return TF_OK;
}

/* log t_nu density of component c at z: log_norm - (nu + d)/2 log(1 + |L^-1 (z - m)|^2 / nu),
 * L^-1 applied by forward substitution. */
static double comp_log_density(const tf_tmix *q, size_t c, const double *z)
{
    const size_t d = q->dim;
    const double *l = q->chol[c], *m = q->mean[c];
    double u[TF_TMIX_MAX_DIM], delta = 0;
    for (size_t i = 0; i < d; i++) {
        double s = z[i] - m[i];
        for (size_t j = 0; j < i; j++)
            s -= l[i * d + j] * u[j];
        u[i] = s / l[i * d + i];
        delta += u[i] * u[i];
    }
    return q->log_norm[c] - 0.5 * (q->nu[c] + (double)d) * log1p(delta / q->nu[c]);
}

double tf_tmix_log_density(const tf_tmix *q, const double *z)
{
    double lc[TF_TMIX_MAX_COMP], top = -INFINITY;
    for (size_t c = 0; c < q->n_comp; c++) {
        lc[c] = q->log_w[c] + comp_log_density(q, c, z);
        if (lc[c] > top)
            top = lc[c];
    }
    if (!(top > -INFINITY))
        return -INFINITY;
    double s = 0;
    for (size_t c = 0; c < q->n_comp; c++)
        s += exp(lc[c] - top);
    return top + log(s);
}

void tf_tmix_draw(const tf_tmix *q, tf_rng *rng, double *z)
{
    const size_t d = q->dim;
    size_t c = 0;
    double u = tf_rng_uniform(rng), acc = 0;
    for (c = 0; c + 1 < q->n_comp; c++) {
        acc += exp(q->log_w[c]);
        if (u < acc)
            break;
    }
    double g[TF_TMIX_MAX_DIM];
    for (size_t i = 0; i < d; i++)
        g[i] = tf_rng_normal(rng);
    gsl_rng view;
    tf_rng_gsl_view(rng, &view);
    double w = gsl_ran_chisq(&view, q->nu[c]);
    /* W > 0 with probability 1; the guard keeps an underflowed draw from giving inf. */
    double f = sqrt(q->nu[c] / (w > 1e-300 ? w : 1e-300));
    const double *l = q->chol[c], *m = q->mean[c];
    for (size_t i = 0; i < d; i++) {
        double s = 0;
        for (size_t j = 0; j <= i; j++)
            s += l[i * d + j] * g[j];
        z[i] = m[i] + f * s;
    }
}

double tf_tmix_weighted_moments(const double *z, const double *w, size_t n, size_t dim, double *mean,
                                double *cov)
{
    double sw = 0, sw2 = 0;
    for (size_t k = 0; k < n; k++) {
        sw += w[k];
        sw2 += w[k] * w[k];
    }
    if (!(sw > 0))
        return 0;
    double m[TF_TMIX_MAX_DIM] = {0};
    for (size_t k = 0; k < n; k++)
        for (size_t i = 0; i < dim; i++)
            m[i] += w[k] / sw * z[k * dim + i];
    for (size_t i = 0; i < dim * dim; i++)
        cov[i] = 0;
    /* Divisor sum w (the weighted analogue of 1/n): the bias correction for weights,
     * 1 / (1 - sum w^2 / (sum w)^2), is left out since the component's scale is widened anyway. */
    for (size_t k = 0; k < n; k++) {
        double a = w[k] / sw;
        if (a == 0)
            continue;
        for (size_t i = 0; i < dim; i++)
            for (size_t j = 0; j <= i; j++)
                cov[i * dim + j] += a * (z[k * dim + i] - m[i]) * (z[k * dim + j] - m[j]);
    }
    for (size_t i = 0; i < dim; i++)
        for (size_t j = 0; j < i; j++)
            cov[j * dim + i] = cov[i * dim + j];
    memcpy(mean, m, dim * sizeof *m);
    return sw * sw / sw2;
}
