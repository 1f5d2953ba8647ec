/* Log and logit transforms to the real line, written so that the far tails keep their precision
 * (log1p / expm1 forms), which matters when a chain wanders towards a support's end. */
#include "sampler/transform.h"

#include <math.h>

tf_status tf_transform_init(tf_transform *t, double lower, double upper, tf_error *err)
{
    t->kind = TF_TRANSFORM_IDENTITY;
    t->lower = lower;
    t->upper = upper;
    if (isnan(lower) || isnan(upper) || !(lower < upper) || lower == INFINITY || upper == -INFINITY)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "a parameter's support (%g, %g) must be a non-empty interval", lower, upper);
    if (isinf(lower) && isinf(upper))
        t->kind = TF_TRANSFORM_IDENTITY;
    else if (isinf(upper))
        t->kind = TF_TRANSFORM_LOWER;
    else if (isinf(lower))
        t->kind = TF_TRANSFORM_UPPER;
    else
        t->kind = TF_TRANSFORM_INTERVAL;
    return TF_OK;
}

/* log(1 / (1 + e^-u)) and log(1 - 1 / (1 + e^-u)) = log(1 / (1 + e^u)), without overflow. */
static double log_inv_logit(double u) { return u >= 0 ? -log1p(exp(-u)) : u - log1p(exp(u)); }

double tf_transform_forward(const tf_transform *t, double x)
{
    switch (t->kind) {
    case TF_TRANSFORM_IDENTITY:
        return x;
    case TF_TRANSFORM_LOWER:
        return x >= t->lower ? log(x - t->lower) : NAN;
    case TF_TRANSFORM_UPPER:
        return x <= t->upper ? log(t->upper - x) : NAN;
    case TF_TRANSFORM_INTERVAL:
        if (!(x >= t->lower && x <= t->upper))
            return NAN;
        /* log(x - a) - log(b - x), each side measured from its own end for precision. */
        return log(x - t->lower) - log(t->upper - x);
    }
    return NAN;
}

double tf_transform_inverse(const tf_transform *t, double u)
{
    switch (t->kind) {
    case TF_TRANSFORM_IDENTITY:
        return u;
    case TF_TRANSFORM_LOWER:
        return t->lower + exp(u);
    case TF_TRANSFORM_UPPER:
        return t->upper - exp(u);
    case TF_TRANSFORM_INTERVAL: {
        double w = t->upper - t->lower;
        /* Step in from the nearer end, so that u far out stays distinct from the end. */
        return u <= 0 ? t->lower + w / (1 + exp(-u)) : t->upper - w / (1 + exp(u));
    }
    }
    return NAN;
}

double tf_transform_log_jacobian(const tf_transform *t, double u)
{
    switch (t->kind) {
    case TF_TRANSFORM_IDENTITY:
        return 0;
    case TF_TRANSFORM_LOWER:
    case TF_TRANSFORM_UPPER:
        return u; /* |d/du (a + e^u)| = e^u */
    case TF_TRANSFORM_INTERVAL:
        /* dx/du = (b - a) s (1 - s), s = 1 / (1 + e^-u) */
        return log(t->upper - t->lower) + log_inv_logit(u) + log_inv_logit(-u);
    }
    return NAN;
}

double tf_transform_to_natural(const tf_transform *t, size_t n, const double *u, double *x)
{
    double log_j = 0;
    for (size_t i = 0; i < n; i++) {
        x[i] = tf_transform_inverse(&t[i], u[i]);
        log_j += tf_transform_log_jacobian(&t[i], u[i]);
    }
    return log_j;
}

void tf_transform_to_unconstrained(const tf_transform *t, size_t n, const double *x, double *u)
{
    for (size_t i = 0; i < n; i++)
        u[i] = tf_transform_forward(&t[i], x[i]);
}
