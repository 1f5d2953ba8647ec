/* One PMMH chain with an adaptive random-walk proposal; see chain.h for the contract. */
#include "sampler/chain.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

struct tf_chain {
    tf_chain_target t;
    tf_chain_options opt;
    double s_d;          /* proposal scale factor */
    double log_lambda;   /* global scale adaptation (Andrieu & Thoms 2008, Algorithm 4) */
    tf_rng rng;

    /* Current and proposed state; swapped on acceptance so no copies are made. */
    double *z, *theta, *aux, *path;
    double *z_new, *theta_new, *aux_new, *path_new;
    double loglik, logprior;
    double screen;       /* log_screen at the current point (0 without screening) */

    /* Proposal: C = (w C0 + M2) / (w + t) + epsilon I, and its Cholesky factor L. */
    double *c0;          /* initial covariance */
    double *mean;        /* running mean of the adapted draws (Welford 1962) */
    double *m2;          /* running sum of outer products of deviations */
    double *cov;         /* current proposal covariance, without s_d */
    double *chol;        /* lower Cholesky factor of cov, row-major */
    double *dev;         /* scratch: one deviation vector */
    size_t n_adapted;
    int adapt;
    int refresh;

    size_t n_steps, n_accepted, n_invalid, n_screened;
};

double tf_chain_delayed_log_alpha2(double ll_new, double ll_cur, double s_new, double s_cur)
{
    double a = (ll_new - ll_cur) - (s_new - s_cur);
    return a < 0.0 ? a : 0.0;
}

tf_chain_options tf_chain_default_options(void)
{
    tf_chain_options o = {.rho = 0.0, .init_weight = 100.0, .regulariser = 1e-8, .scale = 0.0,
                          .target_accept = 0.0};
    return o;
}

void tf_chain_free(tf_chain *c)
{
    if (!c)
        return;
    free(c->z);
    free(c->theta);
    free(c->aux);
    free(c->path);
    free(c->z_new);
    free(c->theta_new);
    free(c->aux_new);
    free(c->path_new);
    free(c->c0);
    free(c->mean);
    free(c->m2);
    free(c->cov);
    free(c->chol);
    free(c->dev);
    free(c);
}

tf_chain *tf_chain_alloc(const tf_chain_target *t, const tf_chain_options *opt)
{
    tf_chain_options o = opt ? *opt : tf_chain_default_options();
    if (!t || t->dim == 0 || t->dim > TF_CHAIN_MAX_DIM || !t->log_prior || !t->log_lik)
        return NULL;
    if (!(o.rho >= 0.0 && o.rho < 1.0) || !(o.init_weight > 0.0) || !(o.regulariser >= 0.0) ||
        !(o.scale >= 0.0) || !(o.target_accept >= 0.0 && o.target_accept < 1.0))
        return NULL;
    tf_chain *c = calloc(1, sizeof *c);
    if (!c)
        return NULL;
    c->t = *t;
    c->opt = o;
    size_t d = t->dim;
    c->s_d = o.scale > 0.0 ? o.scale : 2.38 * 2.38 / (double)d;
    c->z = malloc(d * sizeof(double));
    c->theta = malloc(d * sizeof(double));
    c->z_new = malloc(d * sizeof(double));
    c->theta_new = malloc(d * sizeof(double));
    c->c0 = malloc(d * d * sizeof(double));
    c->mean = malloc(d * sizeof(double));
    c->m2 = malloc(d * d * sizeof(double));
    c->cov = malloc(d * d * sizeof(double));
    c->chol = malloc(d * d * sizeof(double));
    c->dev = malloc(d * sizeof(double));
    if (!c->z || !c->theta || !c->z_new || !c->theta_new || !c->c0 || !c->mean || !c->m2 ||
        !c->cov || !c->chol || !c->dev)
        goto fail;
    if (t->n_aux) {
        c->aux = malloc(t->n_aux * sizeof(double));
        c->aux_new = malloc(t->n_aux * sizeof(double));
        if (!c->aux || !c->aux_new)
            goto fail;
    }
    if (t->n_path) {
        c->path = malloc(t->n_path * sizeof(double));
        c->path_new = malloc(t->n_path * sizeof(double));
        if (!c->path || !c->path_new)
            goto fail;
    }
    c->loglik = c->logprior = -INFINITY;
    return c;
fail:
    tf_chain_free(c);
    return NULL;
}

/* Lower Cholesky factor of the d x d symmetric matrix a into l (both row-major). Returns 0 when
 * a is not numerically positive definite; l is then unspecified. */
static int cholesky(const double *a, double *l, size_t d)
{
    for (size_t i = 0; i < d; i++) {
        for (size_t j = 0; j <= i; j++) {
            double s = a[i * d + j];
            for (size_t k = 0; k < j; k++)
                s -= l[i * d + k] * l[j * d + k];
            if (i == j) {
                if (!(s > 0.0) || !isfinite(s))
                    return 0;
                l[i * d + i] = sqrt(s);
            } else {
                l[i * d + j] = s / l[j * d + j];
            }
        }
        for (size_t j = i + 1; j < d; j++)
            l[i * d + j] = 0.0;
    }
    return 1;
}

/* Recomputes the proposal from C0 and the running moments; keeps the old factor if the new
 * matrix is not positive definite (it always is in exact arithmetic, since C0 is). */
static void update_proposal(tf_chain *c)
{
    size_t d = c->t.dim;
    double w = c->opt.init_weight, n = (double)c->n_adapted;
    for (size_t i = 0; i < d; i++)
        for (size_t j = 0; j < d; j++)
            c->cov[i * d + j] = (w * c->c0[i * d + j] + c->m2[i * d + j]) / (w + n) +
                                (i == j ? c->opt.regulariser : 0.0);
    double l[TF_CHAIN_MAX_DIM * TF_CHAIN_MAX_DIM];
    if (cholesky(c->cov, l, d))
        memcpy(c->chol, l, d * d * sizeof(double));
}

/* Welford's (1962) one-pass update of the mean and the sum of squared deviations, in its
 * multivariate form: M2 += (z - mean_old)(z - mean_new)^T. */
static void add_to_moments(tf_chain *c)
{
    size_t d = c->t.dim;
    double n = (double)(++c->n_adapted);
    for (size_t i = 0; i < d; i++) {
        c->dev[i] = c->z[i] - c->mean[i];
        c->mean[i] += c->dev[i] / n;
    }
    for (size_t i = 0; i < d; i++)
        for (size_t j = 0; j < d; j++)
            c->m2[i * d + j] += c->dev[i] * (c->z[j] - c->mean[j]);
}

static void swap(double **a, double **b)
{
    double *t = *a;
    *a = *b;
    *b = t;
}

tf_status tf_chain_init(tf_chain *c, const double *z0, const double *prop_cov, const tf_rng *rng,
                        tf_error *err)
{
    size_t d = c->t.dim;
    c->rng = *rng;
    c->n_steps = c->n_accepted = c->n_invalid = c->n_screened = 0;
    c->n_adapted = 0;
    c->adapt = 1;
    c->refresh = 0;
    c->log_lambda = 0.0;
    memcpy(c->c0, prop_cov, d * d * sizeof(double));
    memset(c->mean, 0, d * sizeof(double));
    memset(c->m2, 0, d * d * sizeof(double));
    for (size_t i = 0; i < d; i++)
        for (size_t j = 0; j < i; j++)
            if (!(fabs(prop_cov[i * d + j] - prop_cov[j * d + i]) <=
                  1e-12 * (fabs(prop_cov[i * d + j]) + fabs(prop_cov[j * d + i])) + 1e-300))
                return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                                    "the initial proposal covariance is not symmetric");
    if (!cholesky(c->c0, c->chol, d))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "the initial proposal covariance is not positive definite");
    memcpy(c->cov, c->c0, d * d * sizeof(double));
    memcpy(c->z, z0, d * sizeof(double));
    c->loglik = -INFINITY;
    c->logprior = c->t.log_prior(c->t.ctx, c->z, c->theta);
    if (!isfinite(c->logprior))
        return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0, NULL,
                            "the chain's starting point has zero prior density");
    c->screen = c->t.log_screen ? c->t.log_screen(c->t.ctx, c->theta) : 0.0;
    if (!isfinite(c->screen))
        return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0, NULL,
                            "the screening likelihood at the chain's starting point is not finite");
    if (c->t.n_aux)
        tf_rng_fill_normal(&c->rng, c->aux, c->t.n_aux);
    c->loglik = c->t.log_lik(c->t.ctx, c->theta, c->aux, &c->rng, c->path);
    if (!isfinite(c->loglik)) {
        c->loglik = -INFINITY;
        return tf_error_add(err, TF_ERR_NUMERIC, NULL, 0, 0,
                            "more particles, or a starting point nearer the data, may help",
                            "the likelihood estimate at the chain's starting point is not finite");
    }
    return TF_OK;
}

int tf_chain_step(tf_chain *c)
{
    size_t d = c->t.dim;
    double e[TF_CHAIN_MAX_DIM];
    int accepted = 0;
    double alpha = 0.0;   /* acceptance probability of this proposal */
    c->n_steps++;

    if (c->refresh) {
        double ll = c->t.log_lik(c->t.ctx, c->theta, NULL, &c->rng, c->path_new);
        if (isfinite(ll)) {
            c->loglik = ll;
            swap(&c->path, &c->path_new);
        }
    }

    for (size_t i = 0; i < d; i++)
        e[i] = tf_rng_normal(&c->rng);
    double root_s = sqrt(c->s_d) * exp(0.5 * c->log_lambda);
    for (size_t i = 0; i < d; i++) {
        double s = 0.0;
        for (size_t k = 0; k <= i; k++)
            s += c->chol[i * d + k] * e[k];
        c->z_new[i] = c->z[i] + root_s * s;
    }

    double lp = c->t.log_prior(c->t.ctx, c->z_new, c->theta_new);
    /* Delayed acceptance, first stage: the screen alone decides whether the proposal is worth
     * a likelihood estimate. alpha1 multiplies the second stage's probability below. */
    double alpha1 = 1.0, screen_new = 0.0;
    int screened_out = 0;
    if (isfinite(lp) && c->t.log_screen)
        screen_new = c->t.log_screen(c->t.ctx, c->theta_new);
    if (isfinite(lp) && c->t.log_screen && !c->refresh) {
        double log_a1 = (screen_new + lp) - (c->screen + c->logprior);
        if (!isfinite(screen_new)) {
            screened_out = 1;
            alpha1 = 0.0;
        } else if (log_a1 < 0.0) {
            alpha1 = exp(log_a1);
            screened_out = !(log(tf_rng_uniform(&c->rng)) < log_a1);
        }
        if (screened_out)
            c->n_screened++;
    }
    if (screened_out) {
        alpha = 0.0;
    } else if (isfinite(lp)) {
        if (c->t.n_aux) {
            /* Crank-Nicolson move of the auxiliary normals (Deligiannidis et al. 2018, eq. 2.3):
             * reversible with respect to N(0, I), so the joint target keeps u ~ N(0, I). */
            double rho = c->opt.rho, root = sqrt(1.0 - rho * rho);
            uint64_t s[4];
            memcpy(s, c->rng.s, sizeof s);
            for (size_t i = 0; i < c->t.n_aux; i++)
                c->aux_new[i] = rho * c->aux[i] + root * tf_rng_normal_s(s);
            memcpy(c->rng.s, s, sizeof s);
        }
        double ll = c->t.log_lik(c->t.ctx, c->theta_new, c->aux_new, &c->rng, c->path_new);
        if (isfinite(ll)) {
            /* Symmetric proposal in z, so the Hastings ratio is the ratio of targets
             * (Andrieu, Doucet & Holenstein 2010, section 2.4.2); after a screen, the ratio
             * the first stage has not yet accounted for. */
            double log_alpha = c->t.log_screen && !c->refresh
                                   ? tf_chain_delayed_log_alpha2(ll, c->loglik, screen_new, c->screen)
                                   : (ll + lp) - (c->loglik + c->logprior);
            alpha = alpha1 * (log_alpha >= 0.0 ? 1.0 : exp(log_alpha));
            if (log_alpha >= 0.0 || log(tf_rng_uniform(&c->rng)) < log_alpha) {
                swap(&c->z, &c->z_new);
                swap(&c->theta, &c->theta_new);
                swap(&c->aux, &c->aux_new);
                swap(&c->path, &c->path_new);
                c->loglik = ll;
                c->logprior = lp;
                c->screen = screen_new;
                accepted = 1;
                c->n_accepted++;
            }
        } else {
            c->n_invalid++;
        }
    } else {
        c->n_invalid++;
    }

    if (c->adapt) {
        add_to_moments(c);
        update_proposal(c);
        if (c->opt.target_accept > 0.0) {
            /* Step sizes n^-0.6: they sum to infinity and their squares do not, as stochastic
             * approximation needs (Andrieu & Thoms 2008, section 4.2). The log scale is kept
             * within e^+-10 so that a run of invalid estimates cannot drive it to 0. */
            double gamma = pow((double)c->n_adapted, -0.6);
            c->log_lambda += gamma * (alpha - c->opt.target_accept);
            if (c->log_lambda > 10.0)
                c->log_lambda = 10.0;
            if (c->log_lambda < -10.0)
                c->log_lambda = -10.0;
        }
    }
    return accepted;
}

void tf_chain_set_adapt(tf_chain *c, int on) { c->adapt = on != 0; }

void tf_chain_set_refresh(tf_chain *c, int on) { c->refresh = on != 0 && c->t.n_aux == 0; }

void tf_chain_reset_counts(tf_chain *c) { c->n_steps = c->n_accepted = c->n_invalid = c->n_screened = 0; }

size_t tf_chain_dim(const tf_chain *c) { return c->t.dim; }
const double *tf_chain_z(const tf_chain *c) { return c->z; }
const double *tf_chain_theta(const tf_chain *c) { return c->theta; }
const double *tf_chain_path(const tf_chain *c) { return c->t.n_path ? c->path : NULL; }
double tf_chain_loglik(const tf_chain *c) { return c->loglik; }
double tf_chain_logprior(const tf_chain *c) { return c->logprior; }
size_t tf_chain_n_steps(const tf_chain *c) { return c->n_steps; }
size_t tf_chain_n_accepted(const tf_chain *c) { return c->n_accepted; }
size_t tf_chain_n_invalid(const tf_chain *c) { return c->n_invalid; }
size_t tf_chain_n_screened(const tf_chain *c) { return c->n_screened; }
tf_rng tf_chain_rng(const tf_chain *c) { return c->rng; }
double tf_chain_scale_factor(const tf_chain *c) { return exp(c->log_lambda); }

void tf_chain_proposal_cov(const tf_chain *c, double *out)
{
    memcpy(out, c->cov, c->t.dim * c->t.dim * sizeof(double));
}
