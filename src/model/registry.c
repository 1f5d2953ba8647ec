/* The table of growth and observation models. Adding a model is one file and one row here. */
#include <string.h>

#include "model/model_internal.h"

static const tf_growth_type *const growth_table[] = {
    &tf_growth_exponential,
    &tf_growth_ricker,
    &tf_growth_gompertz,
    &tf_growth_theta_logistic,
};

static const tf_obs_type *const obs_table[] = {
    &tf_obs_poisson,
    &tf_obs_lognormal,
    &tf_obs_negbin,
    &tf_obs_lognormal_int,
};

#define N_GROWTH (sizeof growth_table / sizeof growth_table[0])
#define N_OBS (sizeof obs_table / sizeof obs_table[0])

const tf_growth_type *tf_model_find_growth(const char *name)
{
    for (size_t i = 0; name && i < N_GROWTH; i++)
        if (!strcmp(growth_table[i]->name, name))
            return growth_table[i];
    return NULL;
}

const tf_obs_type *tf_model_find_obs(const char *name)
{
    for (size_t i = 0; name && i < N_OBS; i++)
        if (!strcmp(obs_table[i]->name, name))
            return obs_table[i];
    return NULL;
}

size_t tf_model_n_growth(void) { return N_GROWTH; }
size_t tf_model_n_obs(void) { return N_OBS; }
const tf_growth_type *tf_model_growth_at(size_t i) { return i < N_GROWTH ? growth_table[i] : NULL; }
const tf_obs_type *tf_model_obs_at(size_t i) { return i < N_OBS ? obs_table[i] : NULL; }
