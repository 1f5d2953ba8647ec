/* One population's annual counts. */
#include "survey/series.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "util/stats.h"
#include "util/utf8.h"

struct tf_series {
    char *label;
    char *effort_name;  /* NULL = not named */
    int first_year;
    size_t n_years;
    double *counts;
    double *effort;
    long *lines;
    size_t n_surveyed;
    size_t n_zero;
    size_t first_fractional;
    double *removed;          /* n_years, or NULL: no removals or releases */
    double *added;
    double counted_fraction;
};

tf_series *tf_series_new(const char *label, int first_year, size_t n_years, const double *counts,
                         const double *effort, const long *source_lines, tf_error *err)
{
    if (n_years == 0) {
        tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "a series needs at least one year");
        return NULL;
    }
    for (size_t i = 0; i < n_years; i++) {
        double y = counts[i];
        long line = source_lines ? source_lines[i] : 0;
        if (isnan(y))
            continue;
        if (!isfinite(y) || y < 0) {
            tf_error_add(err, TF_ERR_RANGE, NULL, line, 0, NULL,
                         "count %g in year %d is not a finite number >= 0", y, first_year + (int)i);
            return NULL;
        }
        if (effort && !(effort[i] > 0 && isfinite(effort[i]))) {
            tf_error_add(err, TF_ERR_RANGE, NULL, line, 0, NULL,
                         "effort %g in year %d is not a finite number > 0", effort[i], first_year + (int)i);
            return NULL;
        }
    }
    tf_series *s = calloc(1, sizeof *s);
    if (!s)
        goto fail;
    s->label = strdup(label ? label : "");
    s->counts = malloc(n_years * sizeof *s->counts);
    s->effort = malloc(n_years * sizeof *s->effort);
    s->lines = calloc(n_years, sizeof *s->lines);
    if (!s->label || !s->counts || !s->effort || !s->lines)
        goto fail;
    s->first_year = first_year;
    s->n_years = n_years;
    s->first_fractional = n_years;
    s->counted_fraction = 1.0;
    for (size_t i = 0; i < n_years; i++) {
        double y = counts[i];
        s->counts[i] = y;
        s->effort[i] = (!isnan(y) && effort) ? effort[i] : 1.0;
        if (source_lines)
            s->lines[i] = source_lines[i];
        if (isnan(y))
            continue;
        s->n_surveyed++;
        s->n_zero += y == 0;
        if (y != floor(y) && s->first_fractional == n_years)
            s->first_fractional = i;
    }
    return s;
fail:
    tf_series_free(s);
    tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory building a series of %zu years", n_years);
    return NULL;
}

void tf_series_free(tf_series *s)
{
    if (!s)
        return;
    free(s->label);
    free(s->effort_name);
    free(s->counts);
    free(s->effort);
    free(s->lines);
    free(s->removed);
    free(s->added);
    free(s);
}

const char *tf_series_label(const tf_series *s) { return s->label; }

tf_status tf_series_check_effort_name(const char *name, tf_error *err)
{
    static const char hint[] = "name the unit of effort in a few plain words, e.g. --effort-name trap-night";
    size_t len = strlen(name), n_chars = 0;
    if (!len)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "the effort's name is empty");
    if (tf_utf8_bad_at(name, len) != len)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "the effort's name is not valid UTF-8 text");
    if (isspace((unsigned char)name[0]) || isspace((unsigned char)name[len - 1]))
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "the effort's name '%s' starts or ends with a blank",
                            name);
    for (size_t i = 0; i < len; i++) {
        unsigned char c = (unsigned char)name[i];
        /* C0 controls (newline, tab...) and DEL would break a cell or a CSV line; a comma would
         * read as a separator in the unit column and in the command's own lists. */
        if (c < 0x20 || c == 0x7f)
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint,
                                "the effort's name holds a control character (a newline or tab?)");
        if (c == ',')
            return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "the effort's name '%s' holds a comma", name);
        n_chars += (c & 0xc0) != 0x80;
    }
    if (n_chars > TF_SERIES_EFFORT_NAME_MAX)
        return tf_error_add(err, TF_ERR_USAGE, NULL, 0, 0, hint, "the effort's name has %zu characters; at most %d",
                            n_chars, TF_SERIES_EFFORT_NAME_MAX);
    return TF_OK;
}

tf_status tf_series_set_effort_name(tf_series *s, const char *name, tf_error *err)
{
    char *copy = NULL;
    if (name && name[0] && !(copy = strdup(name)))
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory naming the effort");
    free(s->effort_name);
    s->effort_name = copy;
    return TF_OK;
}

const char *tf_series_effort_name(const tf_series *s) { return s->effort_name ? s->effort_name : ""; }
int tf_series_first_year(const tf_series *s) { return s->first_year; }
size_t tf_series_n_years(const tf_series *s) { return s->n_years; }
const double *tf_series_counts(const tf_series *s) { return s->counts; }
const double *tf_series_effort(const tf_series *s) { return s->effort; }
long tf_series_source_line(const tf_series *s, size_t i) { return i < s->n_years ? s->lines[i] : 0; }
size_t tf_series_n_surveyed(const tf_series *s) { return s->n_surveyed; }
size_t tf_series_n_zero(const tf_series *s) { return s->n_zero; }
size_t tf_series_first_fractional(const tf_series *s) { return s->first_fractional; }

static tf_status check_actions(const tf_series *s, const double *v, const char *what, tf_error *err)
{
    for (size_t i = 0; v && i < s->n_years; i++)
        if (!isnan(v[i]) && !(isfinite(v[i]) && v[i] >= 0))
            return tf_error_add(err, TF_ERR_RANGE, NULL, s->lines[i], 0,
                                "removals and releases are numbers of animals >= 0 (write releases as 'added')",
                                "%s %g in year %d is not a number >= 0", what, v[i], s->first_year + (int)i);
    return TF_OK;
}

tf_status tf_series_set_actions(tf_series *s, const double *removed, const double *added, tf_error *err)
{
    tf_status st;
    if ((st = check_actions(s, removed, "removed", err)) || (st = check_actions(s, added, "added", err)))
        return st;
    int any = 0;
    for (size_t i = 0; i < s->n_years; i++)
        any |= (removed && removed[i] > 0) || (added && added[i] > 0);
    double *r = NULL, *a = NULL;
    if (any) {
        r = calloc(s->n_years, sizeof *r);
        a = calloc(s->n_years, sizeof *a);
        if (!r || !a) {
            free(r);
            free(a);
            return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory storing removals");
        }
        for (size_t i = 0; i < s->n_years; i++) {
            r[i] = removed && removed[i] > 0 ? removed[i] : 0.0;
            a[i] = added && added[i] > 0 ? added[i] : 0.0;
        }
    }
    free(s->removed);
    free(s->added);
    s->removed = r;
    s->added = a;
    return TF_OK;
}

int tf_series_has_actions(const tf_series *s) { return s->removed != NULL; }
double tf_series_removed(const tf_series *s, size_t i) { return s->removed && i < s->n_years ? s->removed[i] : 0.0; }
double tf_series_added(const tf_series *s, size_t i) { return s->added && i < s->n_years ? s->added[i] : 0.0; }

tf_status tf_series_set_counted_fraction(tf_series *s, double q, tf_error *err)
{
    if (!(q > 0 && q <= 1))
        return tf_error_add(err, TF_ERR_RANGE, NULL, 0, 0,
                            "give the share of the animals present that a count at effort 1 includes, e.g. 0.8",
                            "counted fraction %g is not in (0, 1]", q);
    s->counted_fraction = q;
    return TF_OK;
}

double tf_series_counted_fraction(const tf_series *s) { return s->counted_fraction; }

double tf_series_take(const tf_series *s, size_t i)
{
    if (!s->removed || i >= s->n_years)
        return 0.0;
    return s->counted_fraction * (s->removed[i] - s->added[i]);
}

size_t tf_series_outliers(const tf_series *s, tf_series_outlier *out, size_t max)
{
    size_t n_found = 0;
    const double *y = s->counts, *e = s->effort;
    for (size_t i = 0; i < s->n_years; i++) {
        if (isnan(y[i]))
            continue;
        double v[2 * TF_SERIES_OUTLIER_WINDOW];
        size_t k = 0, n_before = 0, n_after = 0;
        for (size_t j = i; j-- > 0 && n_before < TF_SERIES_OUTLIER_WINDOW;)
            if (!isnan(y[j]))
                v[k++] = log(y[j] / e[j] + 0.5), n_before++;
        for (size_t j = i + 1; j < s->n_years && n_after < TF_SERIES_OUTLIER_WINDOW; j++)
            if (!isnan(y[j]))
                v[k++] = log(y[j] / e[j] + 0.5), n_after++;
        if (k < TF_SERIES_OUTLIER_MIN_NEIGHBOURS)
            continue;
        double med = tf_stats_median(v, k);
        double d = log(y[i] / e[i] + 0.5) - med;
        double m = (exp(med) - 0.5) * e[i];
        if (fabs(d) <= log(TF_SERIES_OUTLIER_FACTOR) || fabs(y[i] - m) <= 3 * sqrt(fmax(y[i], m)))
            continue;
        if (n_found < max)
            out[n_found] = (tf_series_outlier){.index = i, .count = y[i], .median = m, .factor = exp(d)};
        n_found++;
    }
    return n_found;
}

void tf_series_outlier_text(const tf_series *s, const tf_series_outlier *o, char *buf, size_t size)
{
    const char *label = tf_series_label(s);
    char who[160] = "";
    if (label[0])
        snprintf(who, sizeof who, "population '%.100s', ", label);
    int year = tf_series_first_year(s) + (int)o->index;
    if (o->factor >= 1)
        snprintf(buf, size, "%syear %d: count %.10g is %.1f times the median of the neighbouring years (%.4g)", who,
                 year, o->count, o->factor, o->median);
    else
        snprintf(buf, size, "%syear %d: count %.10g is %.1f times below the median of the neighbouring years (%.4g)",
                 who, year, o->count, 1 / o->factor, o->median);
}

