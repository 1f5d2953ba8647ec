/* Ricker growth on the log scale: x_{t+1} = x_t + r (1 - N_t / K) + sigma * eps, N_t = exp(x_t)
 * (Ricker 1954, J. Fish. Res. Board Can. 11:559; stochastic form as in Dennis & Taper 1994,
 * Ecol. Monogr. 64:205). */
#include "model/model_internal.h"
#include "model/vector_math.h"

static const char *const names[] = {"r", "K"};
/* r > 0: with r <= 0 the carrying capacity K is not an equilibrium the population returns to, so
 * K would mean nothing. r < 5: the deterministic Ricker map is already chaotic beyond r = 2.69
 * (May 1976, Nature 261:459) and maximal annual log growth rates of vertebrates are well below 5
 * (common practice, no source), so the bound only rules out numerically absurd values. */
static const double lower[] = {0.0, 0.0};
static const double upper[] = {5.0, INFINITY};

static void drift(const double *p, const double *x, double *out, size_t n)
{
    const double r = p[0], ln_K = log(p[1]);
    /* Written as exp(x - ln K) rather than exp(x) / K so that the theta-logistic model with
     * theta = 1 performs exactly the same operations (growth_theta_logistic.c). */
    for (size_t i = 0; i < n; i++)
        out[i] = x[i] + r * (1.0 - exp(x[i] - ln_K));
}

const tf_growth_type tf_growth_ricker = {
    "ricker", "Ricker", 2, names, lower, upper, drift,
};
