/* Series checks and prior sets for the fitting commands; see setup.h. */
#include "cmd/setup.h"

#include <math.h>
#include <stdlib.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "model/model_file.h"

tf_status tf_setup_check_counts(const tf_model *m, const tf_series *s, const char *path, tf_error *err)
{
    const tf_obs_type *o = tf_model_obs(m);
    const double *y = tf_series_counts(s);
    size_t n = tf_series_n_years(s);
    int year0 = tf_series_first_year(s);
    if (o->needs_integer) {
        size_t i = tf_series_first_fractional(s);
        if (i < n)
            return tf_error_add(err, TF_ERR_INVALID, path, tf_series_source_line(s, i), 0,
                                "use --obs lognormal for indices that are not whole counts",
                                "count %g in year %d is not a whole number, which the %s model needs",
                                y[i], year0 + (int)i, o->name);
    }
    if (o->needs_positive)
        for (size_t i = 0; i < n; i++)
            if (y[i] == 0)
                return tf_error_add(err, TF_ERR_INVALID, path, tf_series_source_line(s, i), 0,
                                    "use a count model such as poisson or negbin, which allow zero counts",
                                    "count 0 in year %d is impossible under the %s model",
                                    year0 + (int)i, o->name);
    return TF_OK;
}

double tf_setup_survey_median(const tf_series *s)
{
    size_t n = tf_series_n_years(s), k = 0;
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    double *r = malloc(n * sizeof *r);
    if (!r)
        return NAN;
    for (size_t t = 0; t < n; t++)
        if (!isnan(y[t]))
            r[k++] = y[t] / e[t];
    double med = NAN;
    if (k) {
        gsl_sort(r, 1, k);
        med = gsl_stats_median_from_sorted_data(r, 1, k);
    }
    free(r);
    return med;
}

/* Applies one model file to set; reads it from path, or finds the default named name. */
static tf_status apply_file(const char *path, const char *name, const tf_model *m, double median,
                            tf_prior_set *set, tf_error *err)
{
    tf_model_file *mf = NULL;
    tf_status st = path ? tf_model_file_read(path, &mf, err) : tf_model_file_read_default(name, &mf, err);
    if (st != TF_OK)
        return st;
    if (path) {
        /* A user's file naming a parameter the model lacks is a mistake worth stopping for. */
        const char *names[TF_MAX_PARAMS];
        size_t n = tf_model_n_params(m);
        for (size_t i = 0; i < n; i++)
            names[i] = tf_model_param_name(m, i);
        st = tf_model_file_check_names(mf, names, n, err);
    }
    if (st == TF_OK)
        st = tf_model_file_apply(mf, median, set, err);
    tf_model_file_free(mf);
    return st;
}

tf_status tf_setup_priors(const tf_model *m, const tf_series *s, const char *priors_path,
                          tf_prior_set **out, tf_error *err)
{
    *out = NULL;
    size_t n = tf_model_n_params(m);
    const char *names[TF_MAX_PARAMS];
    double lower[TF_MAX_PARAMS], upper[TF_MAX_PARAMS];
    for (size_t i = 0; i < n; i++) {
        names[i] = tf_model_param_name(m, i);
        lower[i] = tf_model_param_lower(m, i);
        upper[i] = tf_model_param_upper(m, i);
    }
    tf_prior_set *set = NULL;
    tf_status st = tf_prior_set_new(n, names, lower, upper, &set, err);
    if (st != TF_OK)
        return st;
    double median = tf_setup_survey_median(s);
    if ((st = apply_file(NULL, tf_model_growth(m)->name, m, median, set, err)) != TF_OK ||
        (tf_model_obs(m)->n_params &&
         (st = apply_file(NULL, "observation", m, median, set, err)) != TF_OK) ||
        (priors_path && (st = apply_file(priors_path, NULL, m, median, set, err)) != TF_OK) ||
        (st = tf_prior_set_check_complete(set, err)) != TF_OK) {
        tf_prior_set_free(set);
        return st;
    }
    *out = set;
    return TF_OK;
}
