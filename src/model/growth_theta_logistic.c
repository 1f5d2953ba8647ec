/* Theta-logistic growth on the log scale: x_{t+1} = x_t + r (1 - (N_t / K)^theta) + sigma * eps
 * (Gilpin & Ayala 1973, PNAS 70:3590; stochastic log form as in Sibly, Barker, Denham, Hone &
 * Pagel 2005, Science 309:607). theta = 1 is the Ricker model, operation for operation. */
#include "model/model_internal.h"
#include "model/vector_math.h"

static const char *const names[] = {"r", "K", "theta"};
/* r in (0, 5) as for the Ricker model (growth_ricker.c). theta in (0, 20): theta > 0 keeps K a
 * stable equilibrium for r > 0; fitted values reported across many species lie well inside
 * (0, 20) (Sibly et al. 2005, Fig. 1), and larger theta makes (N/K)^theta overflow for any N
 * noticeably above K. */
static const double lower[] = {0.0, 0.0, 0.0};
static const double upper[] = {5.0, INFINITY, 20.0};

static void drift(const double *p, const double *x, double *out, size_t n)
{
    const double r = p[0], ln_K = log(p[1]), theta = p[2];
    /* (N / K)^theta = exp(theta (x - ln K)); with theta = 1 this is the Ricker kernel exactly. */
    for (size_t i = 0; i < n; i++)
        out[i] = x[i] + r * (1.0 - exp(theta * (x[i] - ln_K)));
}

const tf_growth_type tf_growth_theta_logistic = {
    "theta-logistic", "theta-logistic", 3, names, lower, upper, drift,
};
