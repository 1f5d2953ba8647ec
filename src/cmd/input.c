/* Reading the survey as the options of the command ask; see input.h. */
#include "cmd/input.h"

#include <math.h>
#include <string.h>

#include "cmd/args.h"
#include "model/model.h"

tf_status tf_input_set_population(tf_input *in, const char *text, tf_error *err)
{
    const char *items[TF_INPUT_MAX_LABELS];
    size_t n = 0;
    in->n_labels = 0;
    tf_status st = tf_args_split_names("--population", text, in->buf, sizeof in->buf, items, TF_INPUT_MAX_LABELS,
                                       &n, err);
    if (st != TF_OK)
        return st;
    for (size_t i = 0; i < n; i++) {
        size_t k = 0;
        while (k < in->n_labels && strcmp(in->labels[k], items[i]))
            k++;
        if (k == in->n_labels)
            in->labels[in->n_labels++] = items[i];
    }
    return TF_OK;
}

tf_status tf_input_set_effort_name(tf_input *in, const char *text, tf_error *err)
{
    tf_status st = tf_series_check_effort_name(text, err);
    if (st == TF_OK)
        in->effort_name = text;
    return st;
}

const char *tf_input_single(const tf_input *in) { return in->n_labels == 1 ? in->labels[0] : NULL; }

static int chosen(const tf_input *in, const char *label)
{
    if (!in->n_labels)
        return 1;
    for (size_t i = 0; i < in->n_labels; i++)
        if (!strcmp(in->labels[i], label))
            return 1;
    return 0;
}

/* The label of the population at place o of the file, usable or set aside. */
static const char *label_at(const tf_survey *sv, size_t o)
{
    for (size_t i = 0; i < tf_survey_n_series(sv); i++)
        if (tf_survey_series_order(sv, i) == o)
            return tf_series_label(tf_survey_series(sv, i));
    for (size_t i = 0; i < tf_survey_n_rejected(sv); i++)
        if (tf_survey_rejected_at(sv, i)->order == o)
            return tf_survey_rejected_at(sv, i)->label;
    return "";
}

/* "'east', 'west', ..." of every population in the file, usable or not, in file order. */
static void all_labels(const tf_survey *sv, char *buf, size_t size)
{
    size_t used = 0, n = tf_survey_n_series(sv) + tf_survey_n_rejected(sv);
    buf[0] = '\0';
    for (size_t i = 0; i < n; i++) {
        const char *label = label_at(sv, i);
        if (used + strlen(label) + 4 + sizeof ", ..." > size) {
            snprintf(buf + used, size - used, "%s...", i ? ", " : "");
            return;
        }
        used += (size_t)snprintf(buf + used, size - used, "%s'%s'", i ? ", " : "", label);
    }
}

static tf_status read_chosen(const tf_input *in, const char *path, FILE *warn, const char *prog, tf_survey **out,
                             tf_error *err)
{
    *out = NULL;
    tf_survey_options so = {.estimates = in->estimates, .effort_name = in->effort_name};
    if (!in->n_labels && !in->skip_unusable)
        return tf_args_read_survey_with(path, &so, out, err);
    so.batch = 1;
    tf_survey *sv = NULL;
    tf_status st = tf_args_read_survey_with(path, &so, &sv, err);
    if (st != TF_OK)
        return st;
    const char *shown = strcmp(path, "-") ? path : "stdin";
    for (size_t i = 0; i < in->n_labels; i++) {
        int found = tf_survey_find(sv, in->labels[i]) != NULL;
        for (size_t k = 0; !found && k < tf_survey_n_rejected(sv); k++)
            found = !strcmp(tf_survey_rejected_at(sv, k)->label, in->labels[i]);
        if (!found) {
            char list[200], hint[256];
            all_labels(sv, list, sizeof list);
            snprintf(hint, sizeof hint, "the file has %s", list);
            st = tf_error_add(err, TF_ERR_USAGE, shown, 0, 0, hint, "no population named '%s'", in->labels[i]);
        }
    }
    if (st != TF_OK)
        goto fail;
    size_t n_left_out = 0;
    for (size_t k = 0; k < tf_survey_n_rejected(sv); k++) {
        const tf_survey_rejected *x = tf_survey_rejected_at(sv, k);
        if (!chosen(in, x->label))
            continue;
        char more[64] = "";
        if (x->n_problems > 1)
            snprintf(more, sizeof more, " (the first of %zu problems)", x->n_problems);
        if (in->skip_unusable) {
            n_left_out++;
            if (warn)
                fprintf(warn, "%s: warning: %s:%ld: population '%s' is left out: %s%s\n", prog, shown, x->line,
                        x->label, x->what, more);
        } else {
            st = tf_error_add(err, x->status, shown, x->line, x->column,
                              x->hint[0] ? x->hint : "leave this population out with --skip-unusable", "%s%s",
                              x->what, more);
        }
    }
    if (st != TF_OK)
        goto fail;
    if (in->n_labels > 1)
        tf_survey_keep(sv, in->labels, in->n_labels);
    size_t n_usable = 0;
    for (size_t i = 0; i < tf_survey_n_series(sv); i++)
        n_usable += chosen(in, tf_series_label(tf_survey_series(sv, i)));
    if (!n_usable) {
        st = tf_error_add(err, TF_ERR_INVALID, shown, 0, 0, "run 'tallyfit check' on the file for every problem",
                          "no usable population is left (%zu left out)", n_left_out);
        goto fail;
    }
    *out = sv;
    return TF_OK;
fail:
    tf_survey_free(sv);
    return st;
}

tf_status tf_input_parse_counted_fraction(const char *text, double *out, tf_error *err)
{
    char buf[64];
    size_t n = strlen(text);
    int percent = n > 0 && n < sizeof buf && text[n - 1] == '%';
    snprintf(buf, sizeof buf, "%.*s", percent ? (int)n - 1 : (int)n, text);
    double q;
    tf_status st = tf_args_parse_double("--counted-fraction", buf, &q, err);
    if (st != TF_OK)
        return st;
    if (percent)
        q /= 100.0;
    if (!(q > 0 && q <= 1))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0,
                            "the share of the animals present that a count at effort 1 includes, e.g. 0.8 or 80% "
                            "(1 = the counts are censuses up to counting error)",
                            "--counted-fraction %s is not in (0, 1]", text);
    *out = q;
    return TF_OK;
}

tf_status tf_input_set_counted_fraction(tf_input *in, const char *text, tf_error *err)
{
    return tf_input_parse_counted_fraction(text, &in->counted_fraction, err);
}

double tf_input_counted_fraction(const tf_input *in) { return in->counted_fraction > 0 ? in->counted_fraction : 1.0; }

/* The removals of one population against its counts: a removal more than
 * TF_INPUT_REMOVAL_FACTOR times the most animals any count implies is refused (a typing error, or
 * removals in other units than animals); one larger than what that year's count implies, or one
 * in a year without a count, is used with a warning. */
static tf_status check_removals(const tf_series *s, double q, const char *shown, FILE *warn, const char *prog,
                                tf_error *err)
{
    if (!tf_series_has_actions(s))
        return TF_OK;
    const double *y = tf_series_counts(s), *e = tf_series_effort(s);
    double most = 0.0;
    for (size_t i = 0; i < tf_series_n_years(s); i++)
        if (!isnan(y[i]))
            most = fmax(most, y[i] / (e[i] * q));
    char who[160] = "";
    if (tf_series_label(s)[0])
        snprintf(who, sizeof who, "population '%.100s', ", tf_series_label(s));
    for (size_t i = 0; i < tf_series_n_years(s); i++) {
        double r = tf_series_removed(s, i);
        int year = tf_series_first_year(s) + (int)i;
        long line = tf_series_source_line(s, i);
        if (r > TF_INPUT_REMOVAL_FACTOR * most) {
            char hint[256];
            snprintf(hint, sizeof hint,
                     "removals are numbers of animals; the largest count implies about %.0f animals (with "
                     "--counted-fraction %g); check the value and the counted fraction",
                     most, q);
            return tf_error_add(err, TF_ERR_RANGE, shown, line, 0, hint,
                                "%syear %d: %.10g animals removed is more than %g times any abundance the counts "
                                "imply",
                                who, year, r, TF_INPUT_REMOVAL_FACTOR);
        }
        if (!warn || (r == 0 && tf_series_added(s, i) == 0))
            continue;
        if (isnan(y[i]))
            fprintf(warn,
                    "%s: warning: %s:%ld: %syear %d has removals or releases but no count: they are used in the "
                    "growth step all the same\n",
                    prog, shown, line, who, year);
        else if (r > y[i] / (e[i] * q))
            fprintf(warn,
                    "%s: warning: %s:%ld: %syear %d: %.10g animals removed, more than the count implies were there "
                    "(%.0f with --counted-fraction %g); a fitted path that cannot hold them is extinct\n",
                    prog, shown, line, who, year, r, y[i] / (e[i] * q), q);
    }
    return TF_OK;
}

tf_status tf_input_prepare(const tf_input *in, tf_survey *sv, const char *path, FILE *warn, const char *prog,
                           tf_error *err)
{
    const char *shown = strcmp(path, "-") ? path : "stdin";
    double q = tf_input_counted_fraction(in);
    tf_status st = tf_survey_set_counted_fraction(sv, q, err);
    for (size_t i = 0; st == TF_OK && i < tf_survey_n_series(sv); i++) {
        const tf_series *s = tf_survey_series(sv, i);
        if (chosen(in, tf_series_label(s)))
            st = check_removals(s, q, shown, warn, prog, err);
    }
    return st;
}

tf_status tf_input_read(const tf_input *in, const char *path, FILE *warn, const char *prog, tf_survey **out,
                        tf_error *err)
{
    tf_survey *sv = NULL;
    tf_status st = read_chosen(in, path, warn, prog, &sv, err);
    if (st == TF_OK && (st = tf_input_prepare(in, sv, path, warn, prog, err)) != TF_OK) {
        tf_survey_free(sv);
        sv = NULL;
    }
    *out = sv;
    return st;
}

tf_status tf_input_check_obs(const tf_input *in, const char *opt, const char *const *names, size_t n,
                             tf_error *err)
{
    tf_status st = TF_OK;
    if (!in->estimates)
        return TF_OK;
    for (size_t i = 0; i < n; i++) {
        const tf_obs_type *o = tf_model_find_obs(names[i]);
        if (o && o->needs_integer) {
            const char *cont[16];
            size_t k = tf_input_continuous_obs(cont, 16);
            char hint[256];
            int used = snprintf(hint, sizeof hint, "with --estimates use %s", opt);
            for (size_t j = 0; j < k && used > 0 && (size_t)used < sizeof hint; j++)
                used += snprintf(hint + used, sizeof hint - (size_t)used, "%s%s", j ? " or " : " ", cont[j]);
            st = tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint,
                              "%s %s is a model of whole counts, and --estimates says the counts are estimates", opt,
                              names[i]);
        }
    }
    return st;
}

size_t tf_input_continuous_obs(const char **names, size_t max)
{
    size_t n = 0;
    for (size_t i = 0; i < tf_model_n_obs() && n < max; i++)
        if (!tf_model_obs_at(i)->needs_integer)
            names[n++] = tf_model_obs_at(i)->name;
    return n;
}

const char *tf_input_default_obs(const tf_input *in) { return in->estimates ? "lognormal" : "poisson"; }

size_t tf_input_warn_outliers(const tf_survey *sv, const char *only, const char *path, const char *prog, FILE *out)
{
    size_t n_all = 0;
    const char *shown = strcmp(path, "-") ? path : "stdin";
    for (size_t i = 0; i < tf_survey_n_series(sv); i++) {
        const tf_series *s = tf_survey_series(sv, i);
        if (only && strcmp(tf_series_label(s), only))
            continue;
        tf_series_outlier o[16];
        size_t n = tf_series_outliers(s, o, 16);
        for (size_t k = 0; k < n && k < 16; k++) {
            char text[400];
            tf_series_outlier_text(s, &o[k], text, sizeof text);
            if (out)
                fprintf(out, "%s: warning: %s:%ld: %s\n  hint: check it for a typing error; it is kept and fitted\n",
                        prog, shown, tf_series_source_line(s, o[k].index), text);
        }
        if (n > 16 && out)
            fprintf(out, "%s: warning: %s: %zu more counts of this population far from their neighbours\n", prog,
                    shown, n - 16);
        n_all += n;
    }
    return n_all;
}
