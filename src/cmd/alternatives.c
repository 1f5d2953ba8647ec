/* The prior-sensitivity options and the folders of alternative priors; see alternatives.h. */
#include "cmd/alternatives.h"

#include <dirent.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "cmd/setup.h"
#include "model/model.h"
#include "model/model_file.h"

void tf_alternatives_init(tf_alternatives *a)
{
    memset(a, 0, sizeof *a);
    a->sensitivity = 1;
    a->refit = 1;
}

const char *tf_alternatives_option(int code, const char *text, tf_alternatives *a, tf_error *err)
{
    const char *name = NULL;
    switch (code) {
    case TF_ALT_OPT_DIR:
        name = "--prior-alternative";
        if (a->n == TF_ANALYSIS_MAX_USER_ALTERNATIVES)
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--prior-alternative: at most %d folders",
                         TF_ANALYSIS_MAX_USER_ALTERNATIVES);
        else
            a->dirs[a->n++] = text;
        break;
    case TF_ALT_OPT_SENSITIVITY:
        name = "--prior-sensitivity";
        if (!strcmp(text, "on"))
            a->sensitivity = 1;
        else if (!strcmp(text, "off"))
            a->sensitivity = 0;
        else
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--prior-sensitivity takes on or off, not '%s'", text);
        break;
    case TF_ALT_OPT_REFIT:
        name = "--prior-refit";
        if (!strcmp(text, "on"))
            a->refit = 1;
        else if (!strcmp(text, "off"))
            a->refit = 0;
        else
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "--prior-refit takes on or off, not '%s'", text);
        break;
    default: return NULL;
    }
    if (!a->first)
        a->first = name;
    return name;
}

/* The folder's name without the path and trailing slashes, into buf. */
static void folder_name(const char *dir, char *buf, size_t size)
{
    size_t n = strlen(dir);
    while (n > 1 && dir[n - 1] == '/')
        n--;
    size_t start = n;
    while (start > 0 && dir[start - 1] != '/')
        start--;
    snprintf(buf, size, "%.*s", (int)(n - start), dir + start);
}

/* The parameter names a model file called stem may set into names (room for max); 0 when stem
 * is no model file's name. */
static size_t names_of(const char *stem, const char **names, size_t max)
{
    size_t n = 0;
    const tf_growth_type *g = tf_model_find_growth(stem);
    int obs_file = !strcmp(stem, "observation");
    if (!g && !obs_file)
        return 0;
    /* Every joined model of the file's growth model (or every one, for observation.ini): the
     * names a default file may hold, as the defaults are read (setup.c). */
    for (size_t gi = 0; gi < tf_model_n_growth(); gi++) {
        if (g && tf_model_growth_at(gi) != g)
            continue;
        for (size_t oi = 0; oi < tf_model_n_obs(); oi++) {
            tf_model *m = NULL;
            if (tf_model_new(tf_model_growth_at(gi)->name, tf_model_obs_at(oi)->name, &m, NULL) != TF_OK)
                continue;
            for (size_t j = 0; j < tf_model_n_params(m); j++) {
                const char *p = tf_model_param_name(m, j);
                int is_obs = j > tf_model_sigma_index(m);
                if (obs_file != is_obs)
                    continue;
                int seen = 0;
                for (size_t k = 0; k < n && !seen; k++)
                    seen = !strcmp(names[k], p);
                if (!seen && n < max)
                    names[n++] = p;
            }
            tf_model_free(m);
        }
        if (obs_file)
            break;
    }
    return n;
}

/* tf_sensitivity_priors_fn: the fitted priors with the folder's files put over them. */
static tf_status folder_priors(void *ctx, const tf_model *m, const tf_series *s, const tf_prior_set *fitted,
                               tf_prior_set **out, tf_error *err)
{
    const char *dir = ctx;
    tf_status st = tf_prior_set_copy(fitted, out, err);
    const char *stems[2] = {tf_model_growth(m)->name, tf_model_obs(m)->n_params ? "observation" : NULL};
    double median = tf_setup_survey_median(s);
    for (int k = 0; k < 2 && st == TF_OK; k++) {
        if (!stems[k])
            continue;
        char path[4200];
        snprintf(path, sizeof path, "%s/%s.ini", dir, stems[k]);
        struct stat sb;
        if (stat(path, &sb) != 0)
            continue;   /* the folder lacks it: the priors stay as fitted */
        tf_model_file *mf = NULL;
        if ((st = tf_model_file_read(path, &mf, err)) == TF_OK)
            st = tf_model_file_apply(mf, median, *out, err);
        tf_model_file_free(mf);
    }
    if (st != TF_OK) {
        tf_prior_set_free(*out);
        *out = NULL;
    }
    return st;
}

static tf_status check_folder(const char *dir, tf_error *err)
{
    DIR *d = opendir(dir);
    if (!d)
        return tf_error_add(err, TF_ERR_INVALID, dir, 0, 0,
                            "give a folder holding edited copies of model files (ricker.ini, observation.ini, ...)",
                            "--prior-alternative: cannot open the folder");
    tf_status st = TF_OK;
    size_t n_files = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        size_t len = strlen(e->d_name);
        if (len < 5 || strcmp(e->d_name + len - 4, ".ini"))
            continue;
        char stem[256], path[4400];
        snprintf(stem, sizeof stem, "%.*s", (int)(len - 4), e->d_name);
        snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
        const char *names[64];
        size_t n_names = names_of(stem, names, 64);
        if (!n_names) {
            char known[256];
            tf_model_list_growth(known, sizeof known);
            st = tf_error_add(err, TF_ERR_INVALID, path, 0, 0, NULL,
                              "not a model file's name: name it after a growth model (%s) or observation.ini", known);
            continue;
        }
        tf_model_file *mf = NULL;
        tf_status fst = tf_model_file_read(path, &mf, err);
        if (fst == TF_OK && strcmp(tf_model_file_name(mf), stem))
            fst = tf_error_add(err, TF_ERR_INVALID, path, 0, 0, "name in the [model] section the model of the file name",
                               "the file is called %s.ini but its [model] name is '%s'", stem, tf_model_file_name(mf));
        if (fst == TF_OK)
            fst = tf_model_file_check_names(mf, names, n_names, err);
        tf_model_file_free(mf);
        if (fst != TF_OK)
            st = fst == TF_ERR_NOMEM ? fst : TF_ERR_INVALID;
        n_files++;
    }
    closedir(d);
    if (st == TF_OK && !n_files)
        st = tf_error_add(err, TF_ERR_INVALID, dir, 0, 0, "copy the model files to change into it and edit them",
                          "--prior-alternative: the folder holds no model file (.ini)");
    return st;
}

tf_status tf_alternatives_check(tf_alternatives *a, tf_error *err)
{
    if (a->n && !a->sensitivity)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                            "--prior-alternative needs the prior sensitivity on (--prior-sensitivity off was given)");
    tf_status st = TF_OK;
    for (size_t i = 0; i < a->n; i++) {
        tf_status fst = check_folder(a->dirs[i], err);
        if (fst != TF_OK)
            st = fst;
        tf_sensitivity_alternative *alt = &a->alt[i];
        memset(alt, 0, sizeof *alt);
        folder_name(a->dirs[i], alt->label, sizeof alt->label);
        alt->priors = folder_priors;
        alt->ctx = (void *)a->dirs[i];
        for (size_t j = 0; j < i; j++)
            if (!strcmp(a->alt[j].label, alt->label))
                st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "rename one of the folders",
                                  "--prior-alternative: two folders are called '%s'", alt->label);
    }
    return st;
}

void tf_alternatives_help(FILE *out, int width)
{
    static const struct {
        const char *opt, *text;
    } items[] = {
        {"--prior-sensitivity on|off",
         "the model probabilities (and in analyze the risks) again with each\n"
         "prior's scale halved and doubled, one parameter at a time for those\n"
         "beyond the exponential model's, and all together; by reweighting the\n"
         "marginal likelihood's own draws, so it costs seconds (default on)"},
        {"--prior-alternative DIR",
         "also with the priors of a folder of edited model files (as in\n"
         "TALLYFIT_MODELS; files it lacks keep the priors used); the folder's\n"
         "name labels its rows; repeatable"},
        {"--prior-refit on|off",
         "where the reweighted draws do not cover an alternative (Pareto k\n"
         "above 0.7), estimate that marginal likelihood again under it: one\n"
         "more importance-sampling run each (default on; off marks such rows\n"
         "unreliable instead)"},
    };
    for (size_t i = 0; i < sizeof items / sizeof items[0]; i++) {
        const char *t = items[i].text;
        int pad = width - 2 - (int)strlen(items[i].opt);
        fprintf(out, "  %s", items[i].opt);
        if (pad < 1) {
            fprintf(out, "\n%*s", width, "");
        } else {
            fprintf(out, "%*s", pad, "");
        }
        for (; *t; t++) {
            fputc(*t, out);
            if (*t == '\n')
                fprintf(out, "%*s", width, "");
        }
        fputc('\n', out);
    }
}
