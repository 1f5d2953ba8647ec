/* Series checks and prior sets for the fitting commands; see setup.h. */
#include "cmd/setup.h"

#include <math.h>
#include <stdlib.h>

#include "compare/compare.h"
#include "model/model_file.h"
#include "util/stats.h"

static tf_status check_obs(const tf_obs_type *o, const tf_series *s, const char *path, tf_error *err);

tf_status tf_setup_check_counts(const tf_model *m, const tf_series *s, const char *path, tf_error *err)
{
    return check_obs(tf_model_obs(m), s, path, err);
}

tf_status tf_setup_check_any_suits(const char *const *obs, size_t n_obs, const tf_series *s, const char *path,
                                   tf_error *err)
{
    size_t n = n_obs ? n_obs : tf_model_n_obs();
    tf_error first;
    tf_error_init(&first);
    for (size_t i = 0; i < n; i++) {
        const tf_obs_type *o = n_obs ? tf_model_find_obs(obs[i]) : tf_model_obs_at(i);
        if (!o)
            continue; /* unknown names are the option parser's to refuse */
        tf_error one;
        tf_error_init(&one);
        if (check_obs(o, s, path, &one) == TF_OK)
            return TF_OK;
        if (!first.n_items)
            first = one;
    }
    const char *label = tf_series_label(s);
    char who[160] = "the population";
    if (label[0])
        snprintf(who, sizeof who, "population '%.100s'", label);
    const tf_error_item *it = first.n_items ? &first.items[0] : NULL;
    return tf_error_add(err, TF_ERR_INVALID, path, it ? it->line : 0, 0,
                        "choose other counting-error models (--obs), or leave the population out (--population, "
                        "--skip-unusable)",
                        "no candidate counting-error model suits the counts of %s%s%s", who, it ? ": " : "",
                        it ? it->what : "");
}

static tf_status check_obs(const tf_obs_type *o, const tf_series *s, const char *path, tf_error *err)
{
    int zero;
    size_t i = tf_model_obs_unsuited(o, s, &zero);
    if (i == tf_series_n_years(s))
        return TF_OK;
    int year = tf_series_first_year(s) + (int)i;
    if (zero)
        return tf_error_add(err, TF_ERR_INVALID, path, tf_series_source_line(s, i), 0,
                            "use a count model such as poisson or negbin, which allow zero counts",
                            "count 0 in year %d is impossible under the %s model", year, o->name);
    return tf_error_add(err, TF_ERR_INVALID, path, tf_series_source_line(s, i), 0,
                        "use --obs lognormal for indices that are not whole counts",
                        "count %g in year %d is not a whole number, which the %s model needs",
                        tf_series_counts(s)[i], year, o->name);
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
    if (k)
        med = tf_stats_median(r, k);
    free(r);
    return med;
}

/* Reads the model file at path, or the default file called name. */
static tf_status read_file(const char *path, const char *name, tf_model_file **out, tf_error *err)
{
    return path ? tf_model_file_read(path, out, err) : tf_model_file_read_default(name, out, err);
}

/* Whether the user's priors file applies to growth model g: when its [model] name is g, or is
 * no growth model's name (a label of the user's own). */
static int file_applies(const tf_model_file *user, const tf_growth_type *g)
{
    const tf_growth_type *named = tf_model_find_growth(tf_model_file_name(user));
    return !named || named == g;
}

/* tf_setup_priors; with strict unset (a candidate among others) a file for another growth model
 * is left aside and sections for parameters m lacks are skipped. */
static tf_status build_priors(const tf_model *m, const tf_series *s, const char *priors_path, int strict,
                              tf_prior_set **out, tf_error *err);

tf_status tf_setup_priors(const tf_model *m, const tf_series *s, const char *priors_path,
                          tf_prior_set **out, tf_error *err)
{
    return build_priors(m, s, priors_path, 1, out, err);
}

static tf_status build_priors(const tf_model *m, const tf_series *s, const char *priors_path, int strict,
                              tf_prior_set **out, tf_error *err)
{
    *out = NULL;
    size_t n = tf_model_n_params(m);
    const char *names[TF_MAX_PARAMS], *def_names[TF_MAX_PARAMS];
    double lower[TF_MAX_PARAMS], upper[TF_MAX_PARAMS], def_lower[TF_MAX_PARAMS], def_upper[TF_MAX_PARAMS];
    tf_model_file *user = NULL, *growth = NULL, *obs = NULL;
    tf_prior_set *set = NULL, *defaults = NULL;
    double median = tf_setup_survey_median(s);
    size_t n0 = err ? err->n_items : 0;
    tf_status st;
    if (priors_path) {
        if ((st = read_file(priors_path, NULL, &user, err)) != TF_OK)
            goto out;
        for (size_t i = 0; i < n; i++)
            names[i] = tf_model_param_name(m, i);
        /* A user's file naming a parameter the model lacks is a mistake worth stopping for, and
         * so is a file made for another growth model (a copy of exponential.ini given to a Ricker
         * fit would quietly set the shared parameters only). A name that is no growth model's (a
         * label of the user's own) is taken as it is. */
        const char *fname = tf_model_file_name(user);
        if (!file_applies(user, tf_model_growth(m))) {
            if (strict) {
                st = tf_error_add(err, TF_ERR_INVALID, tf_model_file_label(user), 0, 0,
                                  "set name in its [model] section to the model it is for",
                                  "the priors file is for model '%s', not %s", fname, tf_model_name(m));
                goto out;
            }
            /* Another candidate's file: this one keeps the defaults. */
            tf_model_file_free(user);
            user = NULL;
        } else if (strict && (st = tf_model_file_check_names(user, names, n, err)) != TF_OK) {
            goto out;
        }
    }
    /* Each parameter takes its prior from one file: the user's when it has a section for it,
     * else the defaults. So the defaults go into a set of only the remaining parameters, where
     * their errors keep their file and line. */
    size_t n_def = 0;
    for (size_t i = 0; i < n; i++) {
        names[i] = tf_model_param_name(m, i);
        lower[i] = tf_model_param_lower(m, i);
        upper[i] = tf_model_param_upper(m, i);
        if (!user || !tf_model_file_has(user, names[i])) {
            def_names[n_def] = names[i];
            def_lower[n_def] = lower[i];
            def_upper[n_def] = upper[i];
            n_def++;
        }
    }
    if ((st = tf_prior_set_new(n, names, lower, upper, &set, err)) != TF_OK)
        goto out;
    if (n_def) {
        if ((st = tf_prior_set_new(n_def, def_names, def_lower, def_upper, &defaults, err)) != TF_OK ||
            (st = read_file(NULL, tf_model_growth(m)->name, &growth, err)) != TF_OK ||
            (st = tf_model_file_apply(growth, median, defaults, err)) != TF_OK)
            goto out;
        if (tf_model_obs(m)->n_params &&
            ((st = read_file(NULL, "observation", &obs, err)) != TF_OK ||
             (st = tf_model_file_apply(obs, median, defaults, err)) != TF_OK))
            goto out;
        for (size_t k = 0; k < n_def; k++) {
            const tf_prior *p = tf_prior_set_prior(defaults, k);
            if (p && (st = tf_prior_set_assign(set, def_names[k], p, err)) != TF_OK)
                goto out;
        }
    }
    if (user && (st = tf_model_file_apply(user, median, set, err)) != TF_OK)
        goto out;
    if ((st = tf_prior_set_check_complete(set, err)) != TF_OK)
        goto out;
    *out = set;
    set = NULL;
out:
    tf_prior_set_free(set);
    tf_prior_set_free(defaults);
    tf_model_file_free(user);
    tf_model_file_free(growth);
    tf_model_file_free(obs);
    /* Whatever the reason (missing, unreadable, malformed, unsuited), the file is an input that
     * cannot be used: one status, so that every command gives it one exit status. */
    return st == TF_OK || st == TF_ERR_NOMEM ? st : tf_error_restatus(err, n0, TF_ERR_INVALID);
}

tf_status tf_setup_user_priors(void *ctx, tf_model *m, const tf_series *s, tf_prior_set **out, tf_error *err)
{
    const tf_setup_user *u = ctx;
    if (u && (!isnan(u->x1_mean) || !isnan(u->x1_sd)))
        tf_model_set_initial(m, isnan(u->x1_mean) ? tf_model_x1_mean(m) : u->x1_mean,
                             isnan(u->x1_sd) ? tf_model_x1_sd(m) : u->x1_sd);
    return build_priors(m, s, u ? u->prior_file : NULL, 0, out, err);
}

tf_status tf_setup_check_candidates(const tf_setup_user *user, const char *const *growth, size_t n_growth,
                                    const char *const *obs, size_t n_obs, const tf_series *s, tf_error *err)
{
    size_t ng = n_growth ? n_growth : tf_model_n_growth(), no = n_obs ? n_obs : tf_model_n_obs();
    tf_model_file *file = NULL;
    tf_status st = TF_OK;
    if (user && user->prior_file && (st = tf_model_file_read(user->prior_file, &file, err)) != TF_OK)
        return st;
    /* The parameters of the candidates the file applies to: each of its sections must name one. */
    const char *names[TF_COMPARE_MAX_MODELS * TF_MAX_PARAMS];
    size_t n_names = 0, n_applies = 0;
    for (size_t i = 0; i < ng && st == TF_OK; i++)
        for (size_t k = 0; k < no && st == TF_OK; k++) {
            const char *g = n_growth ? growth[i] : tf_model_growth_at(i)->name;
            const char *o = n_obs ? obs[k] : tf_model_obs_at(k)->name;
            tf_model *m = NULL;
            tf_prior_set *p = NULL;
            st = tf_model_new(g, o, &m, err);
            if (st == TF_OK)
                st = tf_setup_user_priors((void *)user, m, s, &p, err);
            if (st == TF_OK && file && file_applies(file, tf_model_growth(m))) {
                n_applies++;
                for (size_t j = 0; j < tf_model_n_params(m) && n_names < sizeof names / sizeof names[0]; j++)
                    names[n_names++] = tf_model_param_name(m, j);
            }
            tf_prior_set_free(p);
            tf_model_free(m);
        }
    if (st == TF_OK && file && !n_applies)
        st = tf_error_add(err, TF_ERR_INVALID, tf_model_file_label(file), 0, 0,
                          "add that growth model to the candidates with --model, or name the model the file is for "
                          "in its [model] section",
                          "the priors file is for model '%s', which is not among the candidates",
                          tf_model_file_name(file));
    if (st == TF_OK && file)
        st = tf_model_file_check_names(file, names, n_names, err);
    tf_model_file_free(file);
    return st;
}
