/* Mixtures of multivariate Student-t distributions: density, draws and weighted moments. */
#include "compare/tmix.h"

#include <math.h>
#include <stdlib.h>
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

/* Squared Mahalanobis distance |L^-1 (z - m)|^2 of z from component c (forward substitution). */
static double comp_distance(const tf_tmix *q, size_t c, const double *z)
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
    return delta;
}

/* log t_nu density of component c at squared distance delta:
 * log_norm - (nu + d)/2 log(1 + delta / nu). */
static double comp_log_t(const tf_tmix *q, size_t c, double delta)
{
    return q->log_norm[c] - 0.5 * (q->nu[c] + (double)q->dim) * log1p(delta / q->nu[c]);
}

static double comp_log_density(const tf_tmix *q, size_t c, const double *z)
{
    return comp_log_t(q, c, comp_distance(q, c, z));
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

/* The scale matrix L L' of component c. */
static void comp_cov(const tf_tmix *q, size_t c, double *cov)
{
    const size_t d = q->dim;
    const double *l = q->chol[c];
    for (size_t i = 0; i < d; i++)
        for (size_t j = 0; j <= i; j++) {
            double s = 0;
            for (size_t k = 0; k <= j; k++)
                s += l[i * d + k] * l[j * d + k];
            cov[i * d + j] = cov[j * d + i] = s;
        }
}

tf_status tf_tmix_append(tf_tmix *q, const tf_tmix *src, double factor, double nu, double scale, tf_error *err)
{
    double cov[TF_TMIX_MAX_DIM * TF_TMIX_MAX_DIM];
    for (size_t c = 0; c < src->n_comp; c++) {
        comp_cov(src, c, cov);
        tf_status st = tf_tmix_add(q, factor * exp(src->log_w[c]), nu > 0 ? nu : src->nu[c], src->mean[c], cov, scale,
                                   err);
        if (st != TF_OK)
            return st;
    }
    return TF_OK;
}

/* Relative gain in the weighted log-likelihood below which EM stops. */
#define EM_TOL 1e-9
/* Ridge added to each scale matrix's diagonal, as a share of the points' variances. */
#define EM_RIDGE 1e-6
/* Smallest mixture weight a component keeps, so that tf_tmix_add accepts it. */
#define EM_MIN_WEIGHT 1e-6

tf_status tf_tmix_fit(tf_tmix *q, int warm, const double *z, const double *w, size_t n, size_t n_comp, double nu,
                      size_t n_iter, tf_rng *rng, tf_error *err)
{
    const size_t d = q->dim, K = n_comp;
    if (d < 1 || d > TF_TMIX_MAX_DIM || K < 1 || K > TF_TMIX_MAX_COMP || n < 2 || !(nu > 0 && nu < INFINITY) ||
        (warm && q->n_comp != K))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "unusable mixture fit request");
    double *resp = malloc(n * K * sizeof *resp), *u = malloc(n * K * sizeof *u);
    if (!resp || !u) {
        free(resp);
        free(u);
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory for a mixture fit of %zu points", n);
    }
    tf_status st = TF_OK;
    double mean0[TF_TMIX_MAX_DIM], cov0[TF_TMIX_MAX_DIM * TF_TMIX_MAX_DIM], wsum = 0;
    for (size_t i = 0; i < n; i++)
        wsum += w ? w[i] : 1.0;
    if (!(wsum > 0)) {
        st = tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "every point of the mixture fit has weight 0");
        goto done;
    }
    {
        /* Overall moments (tf_tmix_weighted_moments needs an array of weights; w may be NULL). */
        for (size_t j = 0; j < d; j++) {
            double s = 0;
            for (size_t i = 0; i < n; i++)
                s += (w ? w[i] : 1.0) * z[i * d + j];
            mean0[j] = s / wsum;
        }
        for (size_t a = 0; a < d; a++)
            for (size_t b = 0; b <= a; b++) {
                double s = 0;
                for (size_t i = 0; i < n; i++)
                    s += (w ? w[i] : 1.0) * (z[i * d + a] - mean0[a]) * (z[i * d + b] - mean0[b]);
                cov0[a * d + b] = cov0[b * d + a] = s / wsum;
            }
    }
    tf_tmix cur;
    if (warm) {
        cur = *q;
    } else {
        /* k-means++ seeding: the first centre by weight, each next one with probability
         * proportional to weight times squared distance to the nearest centre so far. */
        tf_tmix metric;
        if ((st = tf_tmix_init(&metric, d, err)) != TF_OK || (st = tf_tmix_add(&metric, 1.0, nu, mean0, cov0, 1.0, err)) != TF_OK)
            goto done;
        double *dmin = u; /* n values of scratch */
        size_t centre[TF_TMIX_MAX_COMP];
        for (size_t k = 0; k < K; k++) {
            double total = 0;
            for (size_t i = 0; i < n; i++) {
                double wi = w ? w[i] : 1.0;
                if (k == 0)
                    dmin[i] = 1.0;
                else {
                    /* Distance to the newest centre in the metric of the points' covariance
                     * (the metric component is centred on mean0, so shift by it). */
                    double zz[TF_TMIX_MAX_DIM];
                    for (size_t j = 0; j < d; j++)
                        zz[j] = z[i * d + j] - z[centre[k - 1] * d + j] + mean0[j];
                    double dd = comp_distance(&metric, 0, zz);
                    if (k == 1 || dd < dmin[i])
                        dmin[i] = dd;
                }
                total += wi * dmin[i];
            }
            double target = tf_rng_uniform(rng) * total, acc = 0;
            size_t pick = n - 1;
            for (size_t i = 0; i < n; i++) {
                acc += (w ? w[i] : 1.0) * dmin[i];
                if (acc > target) {
                    pick = i;
                    break;
                }
            }
            centre[k] = pick;
        }
        double shrink = pow((double)K, -2.0 / (double)d);
        if ((st = tf_tmix_init(&cur, d, err)) != TF_OK)
            goto done;
        for (size_t k = 0; k < K; k++)
            if ((st = tf_tmix_add(&cur, 1.0 / (double)K, nu, z + centre[k] * d, cov0, shrink, err)) != TF_OK)
                goto done;
    }
    double ll_old = -INFINITY;
    for (size_t it = 0; it < n_iter; it++) {
        /* E step: responsibilities and the latent precision weights (nu + d) / (nu + delta). */
        double ll = 0;
        for (size_t i = 0; i < n; i++) {
            double lc[TF_TMIX_MAX_COMP], top = -INFINITY;
            for (size_t k = 0; k < K; k++) {
                double delta = comp_distance(&cur, k, z + i * d);
                u[i * K + k] = (nu + (double)d) / (nu + delta);
                lc[k] = cur.log_w[k] + comp_log_t(&cur, k, delta);
                if (lc[k] > top)
                    top = lc[k];
            }
            double s = 0;
            for (size_t k = 0; k < K; k++)
                s += (resp[i * K + k] = exp(lc[k] - top));
            for (size_t k = 0; k < K; k++)
                resp[i * K + k] /= s;
            ll += (w ? w[i] : 1.0) * (top + log(s));
        }
        if (it > 0 && ll - ll_old <= EM_TOL * fabs(ll))
            break;
        ll_old = ll;
        /* M step. */
        tf_tmix next;
        if ((st = tf_tmix_init(&next, d, err)) != TF_OK)
            goto done;
        double pis[TF_TMIX_MAX_COMP], psum = 0;
        double means[TF_TMIX_MAX_COMP][TF_TMIX_MAX_DIM], covs[TF_TMIX_MAX_COMP][TF_TMIX_MAX_DIM * TF_TMIX_MAX_DIM];
        for (size_t k = 0; k < K; k++) {
            double sa = 0, sau = 0, m[TF_TMIX_MAX_DIM] = {0};
            for (size_t i = 0; i < n; i++) {
                double a = (w ? w[i] : 1.0) * resp[i * K + k], au = a * u[i * K + k];
                sa += a;
                sau += au;
                for (size_t j = 0; j < d; j++)
                    m[j] += au * z[i * d + j];
            }
            double *c = covs[k];
            for (size_t j = 0; j < d * d; j++)
                c[j] = 0;
            if (sau > 0)
                for (size_t j = 0; j < d; j++)
                    m[j] /= sau;
            for (size_t i = 0; i < n && sa > 0; i++) {
                double au = (w ? w[i] : 1.0) * resp[i * K + k] * u[i * K + k];
                if (au == 0)
                    continue;
                for (size_t a = 0; a < d; a++)
                    for (size_t b = 0; b <= a; b++)
                        c[a * d + b] += au * (z[i * d + a] - m[a]) * (z[i * d + b] - m[b]);
            }
            for (size_t a = 0; a < d; a++)
                for (size_t b = 0; b <= a; b++) {
                    double v = sa > 0 ? c[a * d + b] / sa : cov0[a * d + b];
                    if (a == b)
                        v += EM_RIDGE * cov0[a * d + a];
                    c[a * d + b] = c[b * d + a] = v;
                }
            memcpy(means[k], sau > 0 ? m : cur.mean[k], d * sizeof *m);
            pis[k] = fmax(sa / wsum, EM_MIN_WEIGHT);
            psum += pis[k];
        }
        for (size_t k = 0; k < K; k++)
            if ((st = tf_tmix_add(&next, pis[k] / psum, nu, means[k], covs[k], 1.0, err)) != TF_OK)
                goto done;
        cur = next;
    }
    *q = cur;
done:
    free(resp);
    free(u);
    return st;
}
