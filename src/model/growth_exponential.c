/* Density-independent growth: x_{t+1} = x_t + r + sigma * eps (a random walk with drift r, the
 * stochastic exponential model of Dennis, Munholland & Scott 1991, Ecol. Monogr. 61:115). */
#include "model/model_internal.h"

static const char *const names[] = {"r"};
/* Any real r: declining populations (r < 0) are the model's main use. */
static const double lower[] = {-INFINITY};
static const double upper[] = {INFINITY};

static void drift(const double *p, const double *x, double *out, size_t n)
{
    const double r = p[0];
    for (size_t i = 0; i < n; i++)
        out[i] = x[i] + r;
}

const tf_growth_type tf_growth_exponential = {
    "exponential", "exponential growth", 1, names, lower, upper, drift,
};
