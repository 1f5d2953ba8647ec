/* Gompertz growth on the log scale: x_{t+1} = x_t + r (1 - x_t / ln K) + sigma * eps, a linear
 * autoregression x_{t+1} = r + (1 - r / ln K) x_t + sigma * eps (Dennis, Ponciano, Lele, Taper &
 * Staples 2006, Ecol. Monogr. 76:323, eq. 1 with a = r, c = 1 - r / ln K). */
#include "model/model_internal.h"
#include "model/vector_math.h"

static const char *const names[] = {"r", "K"};
/* r in (0, 5) as for the Ricker model (growth_ricker.c). K > 1 so that ln K > 0: the equilibrium
 * log-abundance is ln K, and K <= 1 would put it at or below one animal. */
static const double lower[] = {0.0, 1.0};
static const double upper[] = {5.0, INFINITY};

static void drift(const double *p, const double *x, double *out, size_t n)
{
    const double r = p[0], c = 1.0 - r / log(p[1]);
    for (size_t i = 0; i < n; i++)
        out[i] = r + c * x[i];
}

const tf_growth_type tf_growth_gompertz = {
    "gompertz", "Gompertz", 2, names, lower, upper, drift,
};
