/* Option parsing shared by the commands. */
#include "cmd/args.h"
#include "cmd/cmd.h"
#include "export/atomic.h"
#include "util/buf.h"
#include "util/path.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

void tf_args_pairs_init(tf_arg_pairs *p) { p->n = 0; }

/* Copies text[0..len) into buf without surrounding blanks. */
static void trim_copy(char *buf, size_t size, const char *text, size_t len)
{
    while (len && isspace((unsigned char)*text)) {
        text++;
        len--;
    }
    while (len && isspace((unsigned char)text[len - 1]))
        len--;
    if (len >= size)
        len = size - 1;
    memcpy(buf, text, len);
    buf[len] = '\0';
}

/* A finite number that fills text entirely (blanks around allowed). */
static int number_of(const char *text, double *out)
{
    char *end;
    errno = 0;
    double v = strtod(text, &end);
    if (end == text)
        return 0;
    while (isspace((unsigned char)*end))
        end++;
    if (*end || !isfinite(v) || errno == ERANGE)
        return 0;
    *out = v;
    return 1;
}

tf_status tf_args_parse_double(const char *opt, const char *text, double *out, tf_error *err)
{
    if (!number_of(text, out))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: '%s' is not a finite number", opt, text);
    return TF_OK;
}

const tf_arg_pair *tf_args_pairs_get(const tf_arg_pairs *p, const char *name)
{
    for (size_t i = 0; i < p->n; i++)
        if (!strcmp(p->items[i].name, name))
            return &p->items[i];
    return NULL;
}

tf_status tf_args_parse_pairs(const char *opt, const char *text, tf_arg_pairs *p, tf_error *err)
{
    const char *hint = "write name=value pairs separated by commas, e.g. r=0.5,K=1000,sigma=0.1";
    const char *item = text;
    for (;;) {
        const char *end = strchr(item, ',');
        size_t len = end ? (size_t)(end - item) : strlen(item);
        char buf[256];
        if (len >= sizeof buf)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s: item '%.40s...' is too long", opt, item);
        trim_copy(buf, sizeof buf, item, len);
        if (!buf[0])
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s: empty item in '%s'", opt, text);
        char *eq = strchr(buf, '=');
        if (!eq)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s: '%s' has no '=value'", opt, buf);
        *eq = '\0';
        char name[TF_ARGS_NAME_MAX + 1];
        trim_copy(name, sizeof name, buf, strlen(buf));
        if (!name[0])
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s: a value '%s' has no name", opt, eq + 1);
        if (strlen(name) >= TF_ARGS_NAME_MAX)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: the name '%s' is too long", opt, name);
        double v;
        if (!number_of(eq + 1, &v))
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s: the value of %s ('%s') is not a finite number",
                                opt, name, eq + 1);
        if (tf_args_pairs_get(p, name))
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give each name once", "%s: %s is given twice", opt,
                                name);
        if (p->n >= TF_ARGS_MAX_PAIRS)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: more than %d values", opt,
                                TF_ARGS_MAX_PAIRS);
        /* Fits: longer names were refused above (snprintf here would make GCC warn of a
         * truncation that cannot happen). */
        memcpy(p->items[p->n].name, name, strlen(name) + 1);
        p->items[p->n].value = v;
        p->n++;
        if (!end)
            return TF_OK;
        item = end + 1;
    }
}

tf_status tf_args_parse_doubles(const char *opt, const char *text, double *out, size_t max, size_t *n,
                                tf_error *err)
{
    *n = 0;
    const char *item = text;
    for (;;) {
        const char *end = strchr(item, ',');
        size_t len = end ? (size_t)(end - item) : strlen(item);
        char buf[128];
        if (len >= sizeof buf)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: item '%.40s...' is too long", opt, item);
        trim_copy(buf, sizeof buf, item, len);
        if (!buf[0])
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "separate numbers by single commas",
                                "%s: empty item in '%s'", opt, text);
        if (*n >= max)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: more than %zu values", opt, max);
        if (!number_of(buf, &out[*n]))
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: '%s' is not a finite number", opt, buf);
        (*n)++;
        if (!end)
            return TF_OK;
        item = end + 1;
    }
}

tf_status tf_args_split_names(const char *opt, const char *text, char *buf, size_t size, const char **names,
                              size_t max, size_t *n, tf_error *err)
{
    *n = 0;
    size_t len = strlen(text);
    if (len >= size)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: the list is longer than %zu characters", opt,
                            size - 1);
    memcpy(buf, text, len + 1);
    for (char *p = buf;;) {
        char *end = strchr(p, ',');
        if (end)
            *end = '\0';
        while (isspace((unsigned char)*p))
            p++;
        size_t k = strlen(p);
        while (k && isspace((unsigned char)p[k - 1]))
            p[--k] = '\0';
        if (!k)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "separate names by single commas, e.g. ricker,gompertz",
                                "%s: an empty name in '%s'", opt, text);
        if (*n >= max)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: more than %zu names", opt, max);
        names[(*n)++] = p;
        if (!end)
            return TF_OK;
        p = end + 1;
    }
}

tf_status tf_args_model_names(const char *opt, const char *text, char *buf, size_t size, const char **names,
                              size_t max, size_t *n, int *all, int growth, tf_error *err)
{
    *n = 0;
    *all = !strcmp(text, "all");
    if (*all)
        return TF_OK;
    tf_status st = tf_args_split_names(opt, text, buf, size, names, max, n, err);
    for (size_t i = 0; st == TF_OK && i < *n; i++)
        if (growth ? !tf_model_find_growth(names[i]) : !tf_model_find_obs(names[i])) {
            char known[256], hint[300];
            if (growth)
                tf_model_list_growth(known, sizeof known);
            else
                tf_model_list_obs(known, sizeof known);
            snprintf(hint, sizeof hint, "known: %s, or all", known);
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s: unknown model '%s'", opt, names[i]);
        }
    return st;
}

/* Decimal digits only, into an unsigned 64-bit value; 0 on overflow or anything else. */
static int unsigned_of(const char *text, uint64_t *out)
{
    const char *p = text;
    while (isspace((unsigned char)*p))
        p++;
    if (!isdigit((unsigned char)*p))
        return 0;
    uint64_t v = 0;
    for (; isdigit((unsigned char)*p); p++) {
        unsigned d = (unsigned)(*p - '0');
        if (v > (UINT64_MAX - d) / 10)
            return 0;
        v = v * 10 + d;
    }
    while (isspace((unsigned char)*p))
        p++;
    if (*p)
        return 0;
    *out = v;
    return 1;
}

tf_status tf_args_parse_size(const char *opt, const char *text, size_t min, size_t max, size_t *out,
                             tf_error *err)
{
    uint64_t v;
    if (!unsigned_of(text, &v))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: '%s' is not a whole number >= 0", opt, text);
    if (v < min || v > max)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: %s is outside %zu..%zu", opt, text, min, max);
    *out = (size_t)v;
    return TF_OK;
}

tf_status tf_args_parse_long(const char *opt, const char *text, long min, long max, long *out, tf_error *err)
{
    char *end;
    errno = 0;
    long v = strtol(text, &end, 10);
    while (end != text && isspace((unsigned char)*end))
        end++;
    if (end == text || *end || errno == ERANGE)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: '%s' is not a whole number", opt, text);
    if (v < min || v > max)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "%s: %ld is outside %ld..%ld", opt, v, min, max);
    *out = v;
    return TF_OK;
}

tf_status tf_args_parse_proposal(const char *opt, const char *text, tf_proposal *out, tf_error *err)
{
    if (tf_filter_proposal_parse(text, out))
        return TF_OK;
    return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "use guided (the default) or bootstrap",
                        "%s: unknown proposal '%s'", opt, text);
}

tf_status tf_args_parse_seed(const char *opt, const char *text, uint64_t *out, tf_error *err)
{
    if (!unsigned_of(text, out))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                            "%s: '%s' is not a whole number from 0 to 18446744073709551615", opt, text);
    return TF_OK;
}

tf_status tf_args_getopt_error(const char *cmd, int c, int opt_char, const char *arg, tf_error *err)
{
    char hint[128];
    snprintf(hint, sizeof hint, "run 'tallyfit %s --help' for the options", cmd);
    const char *what = arg ? arg : "";
    if (c == ':') {
        if (opt_char && (!arg || strncmp(arg, "--", 2)))
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "option '-%c' needs a value", opt_char);
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "option '%s' needs a value", what);
    }
    if (opt_char && (!arg || strncmp(arg, "--", 2)))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown option '-%c'", opt_char);
    /* Names of earlier versions: named with their new name rather than left to the help. */
    static const struct {
        const char *old, *hint;
    } renamed[] = {
        {"models", "use --model (a comma list)"},
        {"set", "use --parameter NAME=VALUE,... for parameter values, --prior x1_mean=V,x1_sd=V for the first "
                "year's prior"},
        {"fixed", "use --parameter NAME=VALUE,..."},
        {"priors", "use --prior-file FILE"},
        {"populations", "use --scheme N for an invented scheme of N populations (simulate), --population LIST to "
                        "choose populations"},
    };
    if (!strncmp(what, "--", 2)) {
        size_t len = strcspn(what + 2, "=");
        for (size_t i = 0; i < sizeof renamed / sizeof renamed[0]; i++)
            if (strlen(renamed[i].old) == len && !strncmp(what + 2, renamed[i].old, len))
                return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, renamed[i].hint, "unknown option '--%s'",
                                    renamed[i].old);
    }
    return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "unknown option '%s'", what);
}

const char *tf_args_survey_path(int argc, char **argv, int first, tf_error *err)
{
    if (first >= argc)
        return NULL;
    if (first + 1 < argc)
        tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give one survey file", "unexpected argument '%s'",
                     argv[first + 1]);
    return argv[first];
}

tf_status tf_args_no_survey(const char *cmd, tf_error *err)
{
    char hint[128];
    snprintf(hint, sizeof hint, "run 'tallyfit %s --help' for the usage", cmd);
    return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "no survey file given");
}

/* "'east', 'west', ..." into buf, ending in "..." when buf is too small for all. */
static void population_list(const tf_survey *sv, char *buf, size_t size)
{
    size_t n = tf_survey_n_series(sv), used = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < n; i++) {
        const char *label = tf_series_label(tf_survey_series(sv, i));
        /* Room for this item and a closing ", ..." must remain. */
        if (used + strlen(label) + 4 + sizeof ", ..." > size) {
            snprintf(buf + used, size - used, "%s...", i ? ", " : "");
            return;
        }
        used += (size_t)snprintf(buf + used, size - used, "%s'%s'", i ? ", " : "", label);
    }
}

const tf_series *tf_args_pick_series(const tf_survey *sv, const char *population, const char *path,
                                     tf_error *err)
{
    size_t n = tf_survey_n_series(sv);
    const tf_series *s = population ? tf_survey_find(sv, population) : n == 1 ? tf_survey_series(sv, 0) : NULL;
    if (s)
        return s;
    char list[200], hint[256];
    population_list(sv, list, sizeof list);
    if (population) {
        snprintf(hint, sizeof hint, "the file has %s", list);
        tf_error_add(err, TF_ERR_USAGE, path, 0, 0, hint, "no population named '%s'", population);
    } else {
        snprintf(hint, sizeof hint, "choose one with --population: %s", list);
        tf_error_add(err, TF_ERR_USAGE, path, 0, 0, hint, "the survey holds %zu populations", n);
    }
    return NULL;
}

/* "r, K, sigma, phi" for hints. */
static void param_list(const tf_model *m, char *buf, size_t size)
{
    size_t used = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < tf_model_n_params(m) && used < size; i++) {
        int k = snprintf(buf + used, size - used, "%s%s", i ? ", " : "", tf_model_param_name(m, i));
        if (k < 0)
            break;
        used += (size_t)k;
    }
}

tf_status tf_args_bind_model(tf_model *m, const tf_arg_pairs *set, int require_all, double *theta,
                             unsigned char *given, tf_error *err)
{
    char names[160], hint[256];
    param_list(m, names, sizeof names);
    size_t n = tf_model_n_params(m);
    unsigned char seen[TF_MAX_PARAMS] = {0}, bad[TF_MAX_PARAMS] = {0};
    tf_status st = TF_OK;
    for (size_t i = 0; i < set->n; i++) {
        const tf_arg_pair *p = &set->items[i];
        if (!strcmp(p->name, TF_ARGS_X1_MEAN) || !strcmp(p->name, TF_ARGS_X1_SD))
            continue;
        int k = tf_model_param_index(m, p->name);
        if (k < 0) {
            snprintf(hint, sizeof hint, "the parameters of %s are %s (the first year's prior is set with "
                     "--prior %s=..,%s=..)", tf_model_name(m), names, TF_ARGS_X1_MEAN, TF_ARGS_X1_SD);
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "--parameter: %s is not a parameter of model %s",
                              p->name, tf_model_name(m));
            continue;
        }
        double lo = tf_model_param_lower(m, (size_t)k), hi = tf_model_param_upper(m, (size_t)k);
        if (!(p->value > lo && p->value < hi)) {
            snprintf(hint, sizeof hint, "%s must lie strictly between %g and %g", p->name, lo, hi);
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "--parameter: %s = %g is outside its range for model %s",
                              p->name, p->value, tf_model_name(m));
            bad[k] = 1;
            continue;
        }
        theta[k] = p->value;
        seen[k] = 1;
    }
    if (require_all)
        for (size_t k = 0; k < n; k++)
            if (!seen[k] && !bad[k]) {
                size_t used = (size_t)snprintf(hint, sizeof hint, "model %s needs --parameter ", tf_model_name(m));
                for (size_t j = 0; j < n && used < sizeof hint; j++)
                    used += (size_t)snprintf(hint + used, sizeof hint - used, "%s%s=...", j ? "," : "",
                                             tf_model_param_name(m, j));
                st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "--parameter: the value of %s is missing",
                                  tf_model_param_name(m, k));
            }
    const tf_arg_pair *mean = tf_args_pairs_get(set, TF_ARGS_X1_MEAN), *sd = tf_args_pairs_get(set, TF_ARGS_X1_SD);
    if (sd && !(sd->value > 0))
        st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "the first-year prior needs a positive sd",
                          "--prior: %s = %g is not > 0", TF_ARGS_X1_SD, sd->value);
    if (st != TF_OK)
        return st;
    tf_model_set_initial(m, mean ? mean->value : tf_model_x1_mean(m), sd ? sd->value : tf_model_x1_sd(m));
    if (given)
        memcpy(given, seen, n);
    return TF_OK;
}

static int is_x1(const char *name) { return !strcmp(name, TF_ARGS_X1_MEAN) || !strcmp(name, TF_ARGS_X1_SD); }

/* Refuses a --prior name other than the first-year prior's. */
static tf_status check_prior_names(const tf_arg_pairs *prior, tf_error *err)
{
    tf_status st = TF_OK;
    for (size_t i = 0; i < prior->n; i++)
        if (!strcmp(prior->items[i].name, TF_ARGS_X1_SD) && !(prior->items[i].value > 0))
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "the first-year prior needs a positive sd",
                              "--prior: %s = %g is not > 0", TF_ARGS_X1_SD, prior->items[i].value);
        else if (!is_x1(prior->items[i].name))
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                              "the priors of the model's parameters go in a model file: --prior-file FILE",
                              "--prior takes %s and %s (the first year's log-abundance), not %s", TF_ARGS_X1_MEAN,
                              TF_ARGS_X1_SD, prior->items[i].name);
    return st;
}

tf_status tf_args_merge_prior(tf_arg_pairs *values, const tf_arg_pairs *prior, tf_error *err)
{
    tf_status st = check_prior_names(prior, err);
    for (size_t i = 0; i < values->n; i++)
        if (is_x1(values->items[i].name))
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give it with --prior x1_mean=V,x1_sd=V",
                              "--parameter: %s is the first year's prior, not a parameter of the model",
                              values->items[i].name);
    if (st != TF_OK)
        return st;
    if (values->n + prior->n > TF_ARGS_MAX_PAIRS)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL, "more than %d names in --parameter and --prior",
                            TF_ARGS_MAX_PAIRS);
    for (size_t i = 0; i < prior->n; i++)
        values->items[values->n++] = prior->items[i];
    return TF_OK;
}

tf_status tf_args_model_at(const char *growth, const char *obs, const tf_arg_pairs *set, tf_model **out,
                           double *theta, tf_error *err)
{
    tf_status st = tf_model_new(growth, obs, out, err);
    if (st == TF_OK && (st = tf_args_bind_model(*out, set, 1, theta, NULL, err)) != TF_OK) {
        tf_model_free(*out);
        *out = NULL;
    }
    return st;
}

tf_status tf_args_check_model(const char *growth, const char *obs, tf_error *err)
{
    tf_model *probe = NULL;
    tf_status st = tf_model_new(growth, obs, &probe, err);
    tf_model_free(probe);
    return st;
}

/* Limits of the run-length options that only guard against typos. */
#define RUN_MAX_ITER ((size_t)100000000)
#define RUN_MAX_KEPT ((size_t)10000000)
#define RUN_MIN_KEPT ((size_t)8)

void tf_args_run_init(tf_args_run *r)
{
    memset(r, 0, sizeof *r);
    r->min_ess = NAN;
    r->delayed = -1;
}

const char *tf_args_run_option(int code, const char *text, tf_args_run *r, tf_error *err)
{
    switch (code) {
    case TF_ARGS_OPT_ITER:
        tf_args_parse_size("--iterations", text, 1, RUN_MAX_ITER, &r->iterations, err);
        return "--iterations";
    case TF_ARGS_OPT_MIN_ITER:
        tf_args_parse_size("--min-iterations", text, 1, RUN_MAX_ITER, &r->min_iter, err);
        return "--min-iterations";
    case TF_ARGS_OPT_MAX_ITER:
        tf_args_parse_size("--max-iterations", text, 1, RUN_MAX_ITER, &r->max_iter, err);
        return "--max-iterations";
    case TF_ARGS_OPT_THIN:
        tf_args_parse_size("--thin", text, 1, RUN_MAX_ITER, &r->thin, err);
        return "--thin";
    case TF_ARGS_OPT_KEPT:
        tf_args_parse_size("--kept-draws", text, RUN_MIN_KEPT, RUN_MAX_KEPT, &r->kept, err);
        return "--kept-draws";
    case TF_ARGS_OPT_DELAYED:
        if (!strcmp(text, "on"))
            r->delayed = 1;
        else if (!strcmp(text, "off"))
            r->delayed = 0;
        else
            tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give on or off",
                         "--delayed-acceptance: '%s' is neither on nor off", text);
        return "--delayed-acceptance";
    case TF_ARGS_OPT_MIN_ESS: {
        double v;
        if (tf_args_parse_double("--min-ess", text, &v, err) == TF_OK) {
            if (v >= 1 && v <= 1e7)
                r->min_ess = v;
            else
                tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --min-ess 400",
                             "--min-ess: %s is not between 1 and 1e7", text);
        }
        return "--min-ess";
    }
    default:
        return NULL;
    }
}

tf_status tf_args_run_apply(const tf_args_run *r, tf_pmmh_options *opt, tf_error *err)
{
    if (r->iterations && (r->min_iter || r->max_iter))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                            "give either --iterations or --min-iterations / --max-iterations",
                            "--iterations fixes the run length; it cannot be combined with "
                            "--min-iterations or --max-iterations");
    if (r->iterations)
        opt->min_iter = opt->max_iter = r->iterations;
    if (r->min_iter)
        opt->min_iter = r->min_iter;
    if (r->max_iter)
        opt->max_iter = r->max_iter;
    /* A minimum given alone above the default maximum raises the maximum with it, and a
     * maximum given alone below the default minimum lowers the minimum. */
    if (r->min_iter && !r->max_iter && opt->max_iter < opt->min_iter)
        opt->max_iter = opt->min_iter;
    if (r->max_iter && !r->min_iter && opt->min_iter > opt->max_iter)
        opt->min_iter = opt->max_iter;
    if (r->thin)
        opt->thin = r->thin;
    if (r->kept)
        opt->max_kept = r->kept;
    if (!isnan(r->min_ess))
        opt->min_ess = r->min_ess;
    if (r->delayed >= 0)
        opt->delayed = r->delayed;
    if (opt->min_iter > opt->max_iter)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, NULL,
                            "--min-iterations %zu is above --max-iterations %zu", opt->min_iter,
                            opt->max_iter);
    if (opt->thin > opt->min_iter)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "give a smaller --thin or more iterations",
                            "--thin %zu with runs of %zu iterations keeps no draw", opt->thin,
                            opt->min_iter);
    return TF_OK;
}

static tf_status parse_ml_se(const char *text, double *out, tf_error *err)
{
    double v;
    if (tf_args_parse_double("--ml-se", text, &v, err) != TF_OK)
        return TF_ERR_USAGE;
    if (!(v >= 0 && v <= 10))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "e.g. --ml-se 0.05, or 0 for always --draws draws",
                            "--ml-se: %s is not between 0 and 10", text);
    *out = v;
    return TF_OK;
}

void tf_args_sampler_init(tf_args_sampler *s)
{
    memset(s, 0, sizeof *s);
    tf_args_run_init(&s->run);
    tf_args_pairs_init(&s->prior);
    tf_args_pairs_init(&s->weights);
    s->correlated = -1;
    s->ml_se = NAN;
}

const char *tf_args_sampler_option(int code, const char *text, tf_args_sampler *s, tf_error *err)
{
    const char *name = tf_args_run_option(code, text, &s->run, err);
    if (!name) {
        switch (code) {
        case TF_ARGS_OPT_CHAINS:
            name = "--chains";
            tf_args_parse_size(name, text, 1, TF_FIT_MAX_CHAINS, &s->chains, err);
            break;
        case TF_ARGS_OPT_WARMUP:
            name = "--warmup";
            tf_args_parse_size(name, text, TF_ARGS_MIN_WARMUP, TF_ARGS_MAX_WARMUP, &s->warmup, err);
            break;
        case TF_ARGS_OPT_PARTICLES:
            name = "--particles";
            tf_args_parse_size(name, text, 1, TF_ARGS_MAX_PARTICLES, &s->particles, err);
            break;
        case TF_ARGS_OPT_PROPOSAL:
            name = "--proposal";
            if (tf_args_parse_proposal(name, text, &s->proposal, err) == TF_OK)
                s->proposal_given = 1;
            break;
        case TF_ARGS_OPT_CORRELATED: name = "--correlated"; s->correlated = 1; break;
        case TF_ARGS_OPT_STANDARD: name = "--standard"; s->correlated = 0; break;
        case TF_ARGS_OPT_SEED:
            /* The seed also drives projections and simulations, so it does not count as setting
             * up a fit (s->first). */
            if (tf_args_parse_seed("--seed", text, &s->seed, err) == TF_OK)
                s->seed_given = 1;
            return "--seed";
        case TF_ARGS_OPT_THREADS:
            name = "--threads";
            tf_args_parse_size(name, text, 1, TF_ARGS_MAX_THREADS, &s->threads, err);
            break;
        case TF_ARGS_OPT_RECENT:
            name = "--recent-years";
            tf_args_parse_size(name, text, 2, 200, &s->recent_years, err);
            break;
        case TF_ARGS_OPT_PRIOR_FILE:
            name = "--prior-file";
            s->prior_file = text;
            break;
        case TF_ARGS_OPT_PRIOR:
            name = "--prior";
            tf_args_parse_pairs(name, text, &s->prior, err);
            break;
        case TF_ARGS_OPT_ML_SE:
            name = "--ml-se";
            parse_ml_se(text, &s->ml_se, err);
            if (!s->first_ml)
                s->first_ml = name;
            break;
        case TF_ARGS_OPT_DRAWS:
            name = "--draws";
            tf_args_parse_size(name, text, TF_ARGS_MIN_DRAWS, TF_ARGS_MAX_DRAWS, &s->draws, err);
            if (!s->first_ml)
                s->first_ml = name;
            break;
        case TF_ARGS_OPT_WEIGHTS:
            name = "--model-weights";
            tf_args_parse_pairs(name, text, &s->weights, err);
            if (!s->first_ml)
                s->first_ml = name;
            break;
        default:
            return NULL;
        }
    }
    if (!s->first)
        s->first = name;
    return name;
}

tf_status tf_args_sampler_apply(const tf_args_sampler *s, tf_pmmh_options *fit, tf_evidence_options *ml,
                                uint64_t *seed, size_t *n_threads, tf_error *err)
{
    tf_status st = tf_args_run_apply(&s->run, fit, err);
    if (s->chains)
        fit->n_chains = s->chains;
    if (s->warmup)
        fit->n_warmup = s->warmup;
    if (s->particles)
        fit->n_particles = s->particles;
    if (s->proposal_given)
        fit->proposal = s->proposal;
    if (s->correlated >= 0)
        fit->correlated = s->correlated;
    if (s->seed_given)
        *(seed ? seed : &fit->seed) = s->seed;
    if (s->threads)
        *(n_threads ? n_threads : &fit->n_threads) = s->threads;
    if (s->recent_years)
        fit->recent_years = s->recent_years;
    if (check_prior_names(&s->prior, err) != TF_OK)
        st = TF_ERR_USAGE;
    if (!ml) {
        if (s->first_ml)
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "compare models with 'tallyfit compare'",
                              "%s belongs to the comparison of models by marginal likelihood, which this command "
                              "does not make",
                              s->first_ml);
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : st;
    }
    if (s->particles)
        ml->n_particles = s->particles;
    if (s->proposal_given)
        ml->proposal = s->proposal;
    if (s->seed_given && !seed)
        ml->seed = s->seed;
    if (s->draws)
        ml->n_draws = s->draws;
    if (!isnan(s->ml_se))
        ml->target_se = s->ml_se;
    /* Fewer importance draws (as in short test runs) keep the adaptation rounds in proportion. */
    if (ml->n_adapt_draws > ml->n_draws)
        ml->n_adapt_draws = ml->n_draws;
    return tf_error_status(err) != TF_OK ? tf_error_status(err) : st;
}

/* Whether name is one of names[0 .. n) (n = 0: any). */
static int listed(const char *name, size_t len, const char *const *names, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (strlen(names[i]) == len && !strncmp(names[i], name, len))
            return 1;
    return n == 0;
}

tf_status tf_args_sampler_weights(const tf_args_sampler *s, const char *const *growth, size_t n_growth,
                                  const char *const *obs, size_t n_obs, const char **names, double *values,
                                  size_t *n, tf_error *err)
{
    tf_status st = TF_OK;
    *n = 0;
    for (size_t i = 0; i < s->weights.n; i++) {
        const tf_arg_pair *w = &s->weights.items[i];
        const char *plus = strchr(w->name, '+');
        size_t glen = plus ? (size_t)(plus - w->name) : strlen(w->name);
        char g[TF_ARGS_NAME_MAX];
        snprintf(g, sizeof g, "%.*s", (int)glen, w->name);
        int known = tf_model_find_growth(g) && listed(w->name, glen, growth, n_growth) &&
                    (!plus || (tf_model_find_obs(plus + 1) && listed(plus + 1, strlen(plus + 1), obs, n_obs)));
        if (!known)
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                              "name a candidate growth model (ricker) or candidate model (ricker+poisson)",
                              "--model-weights: '%s' names no candidate model", w->name);
        else if (!(w->value > 0))
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "weights are relative: any positive number",
                              "--model-weights: the weight of '%s' must be positive, not %g", w->name, w->value);
        names[*n] = w->name;
        values[(*n)++] = w->value;
    }
    return st;
}

void tf_args_sampler_user(const tf_args_sampler *s, tf_setup_user *u)
{
    const tf_arg_pair *mean = tf_args_pairs_get(&s->prior, TF_ARGS_X1_MEAN), *sd = tf_args_pairs_get(&s->prior, TF_ARGS_X1_SD);
    u->prior_file = s->prior_file;
    u->x1_mean = mean ? mean->value : NAN;
    u->x1_sd = sd ? sd->value : NAN;
}

/* One option's help: its name padded to width, then the text; each further line of text (after
 * '\n') indented to the same column. */
static void help_item(FILE *out, int width, const char *name, const char *text)
{
    int w = width - 3;
    if ((int)strlen(name) > w)
        fprintf(out, "  %s\n  %-*s ", name, w, "");
    else
        fprintf(out, "  %-*s ", w, name);
    for (const char *p = text; *p; p++) {
        fputc(*p, out);
        if (*p == '\n' && p[1])
            fprintf(out, "  %-*s ", w, "");
    }
    fputc('\n', out);
}

void tf_args_sampler_help(FILE *out, const tf_pmmh_options *d, const tf_evidence_options *e, int width)
{
    /* Lines of at most 66 characters, so that the widest padding (26) stays within 92 columns. */
    char t[512];
    snprintf(t, sizeof t, "chains per model (default %zu)", d->n_chains);
    help_item(out, width, "--chains C", t);
    snprintf(t, sizeof t, "discarded iterations per chain while the sampler adapts\n(default %zu)", d->n_warmup);
    help_item(out, width, "--warmup W", t);
    snprintf(t, sizeof t,
             "run each chain, after the warm-up, until every parameter and the\n"
             "true abundance of the first and last year have R-hat <= %.2f and\n"
             "bulk and tail ESS >= E (default %.0f)",
             TF_FIT_RHAT_MAX, d->min_ess);
    help_item(out, width, "--min-ess E", t);
    snprintf(t, sizeof t, "but at least I iterations per chain (default %zu)", d->min_iter);
    help_item(out, width, "--min-iterations I", t);
    snprintf(t, sizeof t, "and at most I (default %zu)", d->max_iter);
    help_item(out, width, "--max-iterations I", t);
    help_item(out, width, "--iterations I",
              "run exactly I iterations per chain after the warm-up, without the\n"
              "convergence checks deciding (no default: the bounds above apply)");
    snprintf(t, sizeof t,
             "keep every K-th iteration at first (default %zu); the thinning\n"
             "doubles whenever the kept draws fill their store",
             d->thin);
    help_item(out, width, "--thin K", t);
    snprintf(t, sizeof t, "keep at most N draws per chain (default %zu)", d->max_kept);
    help_item(out, width, "--kept-draws N", t);
    help_item(out, width, "--particles N",
              "particles of the filter (default: chosen per model so that the\n"
              "log-likelihood estimate's sd is near its target)");
    help_item(out, width, "--proposal P",
              "how the particle filter moves: guided (default; looks at each\n"
              "year's count first, far fewer particles for large counts) or\n"
              "bootstrap (the growth model alone, for checks and comparisons)");
    snprintf(t, sizeof t, "correlated pseudo-marginal method (default: %s)", d->correlated ? "on" : "off");
    help_item(out, width, "--correlated", t);
    snprintf(t, sizeof t, "standard pseudo-marginal method (default: %s)", d->correlated ? "off" : "on");
    help_item(out, width, "--standard", t);
    snprintf(t, sizeof t,
             "screen each proposal with a cheap approximate likelihood before\n"
             "the particle filter runs; exact either way (default %s)",
             d->delayed ? "on" : "off");
    help_item(out, width, "--delayed-acceptance on|off", t);
    snprintf(t, sizeof t, "random seed (default %llu); the same seed gives the same numbers",
             (unsigned long long)d->seed);
    help_item(out, width, "--seed S", t);
    help_item(out, width, "--threads T",
              "threads (default: the number of processors); the results do not\n"
              "depend on T");
    snprintf(t, sizeof t, "years of the recent trend, the last Y years of the survey (default %d;\n"
             "judge recent change over about three generations, at least 10 years)", TF_FIT_RECENT_YEARS);
    help_item(out, width, "--recent-years Y", t);
    help_item(out, width, "--prior-file FILE",
              "a model file overriding some or all default priors: of the model\n"
              "fitted, or of the candidates of the growth model it names (of\n"
              "every candidate when it names none), each for the parameters it has");
    snprintf(t, sizeof t,
             "prior of the first year's log-abundance, for every model fitted\n"
             "(default: the log of the mean of the first %d counts / effort, and 1)",
             TF_MODEL_X1_YEARS);
    help_item(out, width, "--prior x1_mean=V,x1_sd=V", t);
    if (!e)
        return;
    snprintf(t, sizeof t,
             "draw importance draws until the standard error of each log\n"
             "marginal likelihood is at most S (default %.2f; 0 = always --draws\n"
             "draws)",
             e->target_se);
    help_item(out, width, "--ml-se S", t);
    snprintf(t, sizeof t, "importance draws per density for each marginal likelihood, at\nmost (default %zu)",
             e->n_draws);
    help_item(out, width, "--draws M", t);
    help_item(out, width, "--model-weights NAME=W,...",
              "prior model weights (relative; default all equal). NAME is a\n"
              "model (ricker+poisson) or a growth model (all its counting-error\n"
              "models); models not named get 1");
}

void tf_args_quiet_help(FILE *out, int width)
{
    help_item(out, width, "-q, --quiet", "no progress display and no summary; warnings and errors are\nstill printed");
}

size_t tf_args_default_threads(size_t max)
{
    long n_cpu = sysconf(_SC_NPROCESSORS_ONLN);
    size_t n = n_cpu > 0 ? (size_t)n_cpu : 1;
    return n < max ? n : max;
}

tf_status tf_args_read_survey(const char *path, tf_survey **out, tf_error *err)
{
    return tf_args_read_survey_with(path, &(tf_survey_options){0}, out, err);
}

tf_status tf_args_read_survey_with(const char *path, const tf_survey_options *o, tf_survey **out, tf_error *err)
{
    *out = NULL;
    if (strcmp(path, "-"))
        return tf_survey_read_with(path, o, out, err);
    char *buf = NULL;
    size_t len = 0, cap = 0;
    tf_status st;
    for (;;) {
        if (!tf_buf_grow((void **)&buf, &cap, len + 1, 1, 65536)) {
            st = tf_error_add(err, TF_ERR_NOMEM, "stdin", 0, 0, NULL, "out of memory reading the survey");
            goto done;
        }
        size_t n = fread(buf + len, 1, cap - len, stdin);
        len += n;
        if (len > (size_t)TF_SURVEY_MAX_BYTES) {
            st = tf_error_add(err, TF_ERR_RANGE, "stdin", 0, 0, NULL, "the survey is larger than %ld MiB",
                              TF_SURVEY_MAX_BYTES >> 20);
            goto done;
        }
        if (n == 0)
            break;
    }
    if (ferror(stdin)) {
        st = tf_error_add(err, TF_ERR_IO, "stdin", 0, 0, NULL, "cannot read the survey from standard input");
        goto done;
    }
    st = tf_survey_parse_with("stdin", buf ? buf : "", len, o, out, err);
done:
    free(buf);
    return st;
}

void tf_args_survey_name(const char *path, char *out, size_t size)
{
    if (!strcmp(path, "-")) {
        snprintf(out, size, "stdin");
        return;
    }
    const char *base = strrchr(path, '/');
    base = base ? base + 1 : path;
    snprintf(out, size, "%s", base);
    size_t n = strlen(out);
    if (n > 4 && !strcasecmp(out + n - 4, ".csv"))
        out[n - 4] = '\0';
    if (!out[0] || !strcmp(out, ".") || !strcmp(out, ".."))
        snprintf(out, size, "survey");
}

tf_status tf_args_folders_new(const tf_survey *sv, tf_args_folders *f, tf_error *err)
{
    memset(f, 0, sizeof *f);
    size_t n = sv ? tf_survey_n_series(sv) : 0;
    if (!n)
        return TF_OK;
    f->labels = calloc(n, sizeof *f->labels);
    f->names = calloc(n, sizeof *f->names);
    for (size_t i = 0; f->labels && i < n; i++)
        f->labels[i] = tf_series_label(tf_survey_series(sv, i));
    if (!f->labels || !f->names || !tf_path_folder_names(f->labels, n, f->names)) {
        free(f->labels);
        free(f->names);
        memset(f, 0, sizeof *f);
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory naming the output folders");
    }
    f->n = n;
    return TF_OK;
}

void tf_args_folders_free(tf_args_folders *f)
{
    for (size_t i = 0; f->names && i < f->n; i++)
        free(f->names[i]);
    free(f->names);
    free(f->labels);
    memset(f, 0, sizeof *f);
}

void tf_args_folder_of(const tf_args_folders *f, const char *label, char *out, size_t size)
{
    for (size_t i = 0; i < f->n; i++)
        if (!strcmp(f->labels[i], label)) {
            snprintf(out, size, "%s", f->names[i]);
            return;
        }
    /* A label the survey does not hold: the rule applied to that label alone; out of memory:
     * the label made safe. */
    char *alone = NULL;
    if (tf_path_folder_names(&label, 1, &alone))
        snprintf(out, size, "%s", alone);
    else
        tf_path_safe_name(label, out, size);
    free(alone);
}

tf_status tf_args_output_dir(char *dir, size_t size, const char *out_dir, const char *base, const char *label,
                             int several, tf_error *err)
{
    char sub[256];
    tf_path_safe_name(label, sub, sizeof sub);
    int n = out_dir ? snprintf(dir, size, several ? "%s/%s" : "%s", out_dir, sub)
                    : snprintf(dir, size, several ? "output/%s/%s" : "output/%s", base, sub);
    if (n < 0 || (size_t)n >= size)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, "choose a shorter -o directory",
                            "the output path is too long");
    return TF_OK;
}

int tf_args_exit_code(tf_status st)
{
    switch (st) {
    case TF_OK: return TF_EXIT_OK;
    case TF_ERR_USAGE:
    case TF_ERR_UNSUPPORTED: return TF_EXIT_USAGE;
    case TF_ERR_INTERRUPTED: return TF_EXIT_INTERRUPTED;
    case TF_ERR_INVALID: return TF_EXIT_INPUT;
    default: return TF_EXIT_FAIL;
    }
}

/* Whether dir or one of the folders above it in its name is the file at input. */
static int names_input(const char *dir, const char *input)
{
    struct stat in, st;
    if (!input || !strcmp(input, "-") || stat(input, &in) != 0)
        return 0;
    char buf[4200];
    size_t n = strlen(dir);
    if (n >= sizeof buf)
        return 0;
    memcpy(buf, dir, n + 1);
    for (size_t i = 1; i <= n; i++) {
        if (i < n && buf[i] != '/')
            continue;
        char saved = buf[i];
        buf[i] = '\0';
        int same = stat(buf, &st) == 0 && st.st_dev == in.st_dev && st.st_ino == in.st_ino;
        buf[i] = saved;
        if (same)
            return 1;
    }
    return 0;
}

tf_status tf_args_probe_output_dir(const char *dir, const char *input, tf_error *err)
{
    return tf_args_probe_output_dir_keep(dir, input, 0, err);
}

tf_status tf_args_probe_output_dir_keep(const char *dir, const char *input, int keep_dirs, tf_error *err)
{
    if (names_input(dir, input))
        return tf_error_add(err, TF_ERR_USAGE, dir, 0, 0, "give -o a folder for the results",
                            "the output folder would be the survey file '%s'", input);
    size_t created = 0;
    tf_status st = tf_atomic_mkdirs(dir, &created, err);
    if (st == TF_OK) {
        char probe[4200];
        int n = snprintf(probe, sizeof probe, "%s/.tallyfit-probe-XXXXXX", dir);
        if (n < 0 || (size_t)n >= sizeof probe)
            return tf_error_add(err, TF_ERR_USAGE, dir, 0, 0, "choose a shorter -o folder", "the output path is too long");
        int fd = mkstemp(probe);
        if (fd < 0) {
            int e = errno;
            st = tf_error_add(err, TF_ERR_IO, dir, 0, 0, "choose a folder you can write to",
                              "cannot write in the output folder: %s", strerror(e));
        } else {
            close(fd);
            unlink(probe);
        }
    }
    if (!keep_dirs)
        tf_atomic_rmdirs(dir, created);
    return st;
}
