/* The records a batch keeps beside the populations' tables; see records.h. */
#include "batch/records.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis/sheets.h"
#include "analysis/wording.h"
#include "export/csv_out.h"
#include "util/version.h"

static tf_status nomem(tf_error *err) { return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"); }

/* ---- the settings record ---- */

/* Appends a printf-style line to a memory stream. */
static void line(FILE *f, const char *key, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void line(FILE *f, const char *key, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fprintf(f, "%s ", key);
    vfprintf(f, fmt, ap);
    fputc('\n', f);
    va_end(ap);
}

static void names_line(FILE *f, const char *key, const char *const *names, size_t n, const char *none)
{
    fprintf(f, "%s ", key);
    if (!n)
        fputs(none, f);
    for (size_t i = 0; i < n; i++)
        fprintf(f, "%s%s", i ? "," : "", names[i]);
    fputc('\n', f);
}

/* Every setting that changes a number in the outputs, one per line, so that a mismatch can be
 * named. The thread count is not among them: the results do not depend on it. */
tf_status tf_records_settings(const tf_analysis_options *a, const char *sha256, int workbooks, int workbook_draws,
                              const char *extra, char **out, tf_error *err)
{
    char *text = NULL;
    size_t len = 0;
    *out = NULL;
    FILE *f = open_memstream(&text, &len);
    if (!f)
        return nomem(err);
    fputs("# tallyfit batch settings: a run in this folder continues an earlier one only with the same lines\n", f);
    line(f, "program", "tallyfit %s", TF_VERSION);
    line(f, "survey-sha256", "%s", sha256);
    line(f, "seed", "%llu", (unsigned long long)a->seed);
    /* A setting that an option sets is keyed by the option's name; the others (the sampler's
     * and the marginal likelihood's fixed constants) by plain names of their own. */
    names_line(f, "model", a->growth, a->n_growth, "all");
    if (a->obs_auto)
        line(f, "obs", "%s", "all that suit");
    else
        names_line(f, "obs", a->obs, a->n_obs, "default");
    /* Written only when set, so that the records of earlier batches stay the same. */
    if (a->estimates)
        line(f, "estimates", "%s", "yes (continuous counting-error models only)");
    line(f, "chains", "%zu", a->fit.n_chains);
    line(f, "min-iterations", "%zu", a->fit.min_iter);
    line(f, "max-iterations", "%zu", a->fit.max_iter);
    line(f, "min-ess", "%.17g", a->fit.min_ess);
    line(f, "kept-draws", "%zu", a->fit.max_kept);
    line(f, "thin", "%zu", a->fit.thin);
    line(f, "warmup", "%zu", a->fit.n_warmup);
    line(f, "particles", "%zu", a->fit.n_particles);
    line(f, "correlated", "%s", a->fit.correlated ? "on" : "off");
    line(f, "correlated-rho", "%.17g", a->fit.rho);
    line(f, "pilot-particles", "%zu", a->fit.pilot_particles);
    line(f, "delayed-acceptance", "%s", a->fit.delayed ? "on" : "off");
    line(f, "proposal", "%s", tf_filter_proposal_name(a->fit.proposal));
    const tf_evidence_options *e = &a->evidence;
    line(f, "draws", "%zu", e->n_draws);
    line(f, "ml-min-draws", "%zu", e->min_draws);
    line(f, "ml-se", "%.17g", e->target_se);
    line(f, "ml-adapt", "%zu %zu", e->n_adapt_rounds, e->n_adapt_draws);
    line(f, "ml-mixture", "%.17g %zu %.17g %.17g", e->nu, e->n_components, e->defensive_weight, e->defensive_scale);
    line(f, "ml-check", "%.17g %.17g", e->check_nu, e->check_scale);
    line(f, "ml-particles", "%zu %.17g", e->n_particles, e->target_sd);
    const tf_project_options *p = &a->project;
    line(f, "years", "%zu", p->horizon);
    line(f, "runs", "%zu", p->n_runs);
    fputs("threshold", f);
    for (size_t k = 0; k < p->n_thresholds; k++) {
        char lab[48];
        fprintf(f, "%c%s", k ? ',' : ' ', tf_project_threshold_label(&p->thresholds[k], lab, sizeof lab));
    }
    fputc('\n', f);
    fputs("declines", f);
    for (size_t k = 0; k < p->n_declines; k++)
        fprintf(f, "%c%.17g", k ? ',' : ' ', p->declines[k]);
    fputc('\n', f);
    line(f, "decline-window", "%zu", p->decline_window);
    line(f, "population-workbooks", "%s", workbooks ? "yes" : "no");
    /* Only with workbooks, where it changes what is written: a batch without them keeps the
     * record it had before the draws left the workbooks. */
    if (workbooks)
        line(f, "workbook-draws", "%s", workbook_draws ? "yes" : "no");
    if (extra && extra[0]) {
        fputs(extra, f);
        if (extra[strlen(extra) - 1] != '\n')
            fputc('\n', f);
    }
    if (fclose(f) != 0 || !text) {
        free(text);
        return nomem(err);
    }
    *out = text;
    return TF_OK;
}

/* ---- the summary rows ---- */

/* Risk windows within the projection horizon. */
static size_t n_risk_years(const tf_project_options *p)
{
    size_t n = 0;
    while (n < TF_ANALYSIS_N_RISK_YEARS && tf_analysis_risk_years[n] <= p->horizon)
        n++;
    return n;
}

static size_t n_windows(const tf_project_options *p) { return p->decline_window ? 2 : 1; }
static size_t window(const tf_project_options *p, size_t w) { return w ? p->decline_window : TF_PROJECT_BASE_WINDOW; }

enum {
    C_POP, C_STATUS, C_FIRST, C_LAST, C_SURVEYED, C_UNIT, C_ABUND, C_ABUND_LO, C_ABUND_HI, C_CHANGE, C_CHANGE_LO,
    C_CHANGE_HI, C_PDEC, C_GROWTH, C_GROWTH_P, C_MODEL, C_MODEL_P, C_RISK0 /* then risks, declines, checks, reason */
};

tf_table *tf_records_table(const tf_project_options *p, const char *name, tf_error *err)
{
    tf_table *t = tf_table_new(name, err);
    if (!t)
        return NULL;
    tf_status st = TF_OK;
#define COL(h, l, k)                                                                                                   \
    do {                                                                                                               \
        if (st == TF_OK)                                                                                               \
            st = tf_table_add_column(t, h, l, k, NULL, err);                                                           \
    } while (0)
    COL("Population", "the population's label", TF_COL_TEXT);
    COL("Status", "done; failed or bad data (see Reason); not done (run the batch again to finish)", TF_COL_TEXT);
    COL("First year", "first year of the survey", TF_COL_YEAR);
    COL("Last year", "last year of the survey", TF_COL_YEAR);
    COL("Years surveyed", "years with a count", TF_COL_INTEGER);
    COL("Unit", "animals, or animals per unit of effort where effort differs between years", TF_COL_TEXT);
    COL("Abundance", "estimated abundance in the last year, posterior median", TF_COL_NUMBER);
    COL("Lower 95 %", "2.5 % posterior quantile of that abundance", TF_COL_NUMBER);
    COL("Upper 95 %", "97.5 % posterior quantile of that abundance", TF_COL_NUMBER);
    COL("Annual change", "average annual change over the survey years, posterior median", TF_COL_PERCENT);
    COL("Change lower 95 %", "2.5 % posterior quantile of the annual change", TF_COL_PERCENT);
    COL("Change upper 95 %", "97.5 % posterior quantile of the annual change", TF_COL_PERCENT);
    COL("P(declined)", "posterior probability that the annual change was negative", TF_COL_PROBABILITY);
    COL("Best growth model", "growth model of highest posterior probability", TF_COL_TEXT);
    COL("Its probability", "its posterior probability, over the counting-error models", TF_COL_PROBABILITY);
    COL("Best model", "growth and counting-error model of highest posterior probability", TF_COL_TEXT);
    COL("Model probability", "that model's posterior probability", TF_COL_PROBABILITY);
    size_t nry = n_risk_years(p);
    for (size_t k = 0; k < p->n_thresholds; k++) {
        char label[64], words[96], header[96], legend[256];
        tf_project_threshold_label(&p->thresholds[k], label, sizeof label);
        tf_wording_threshold(&p->thresholds[k], words, sizeof words);
        for (size_t y = 0; y < nry; y++) {
            snprintf(header, sizeof header, "Below %s in %zu y", label, tf_analysis_risk_years[y]);
            snprintf(legend, sizeof legend, "chance of falling below %s within %zu years", words,
                     tf_analysis_risk_years[y]);
            COL(header, legend, TF_COL_PROBABILITY);
        }
    }
    for (size_t w = 0; w < n_windows(p); w++)
        for (size_t d = 0; d < p->n_declines; d++) {
            char pct[32], header[96], legend[256];
            tf_wording_percent(100 * p->declines[d], pct, sizeof pct);
            snprintf(header, sizeof header, "Decline %s %% in %zu y", pct, window(p, w));
            snprintf(legend, sizeof legend, "chance of a decline of %s %% or more within %zu years", pct, window(p, w));
            COL(header, legend, TF_COL_PROBABILITY);
        }
    COL("Sampler checks", "passed: every fit passed the R-hat and ESS checks", TF_COL_TEXT);
    COL("Reason", "why the population failed or was set aside", TF_COL_TEXT);
#undef COL
    if (st != TF_OK) {
        tf_table_free(t);
        return NULL;
    }
    return t;
}

/* Fills row 0 of the one-row table t for a population (s NULL when it was set aside). pop is
 * the analysed population (NULL unless done). */
static tf_status fill_row(const tf_project_options *p, tf_table *t, const char *label, const tf_series *s,
                          const tf_analysis_pop *pop, const char *status, const char *reason, tf_error *err)
{
    size_t nc = tf_table_n_columns(t), row;
    tf_status st = tf_table_add_row(t, &row, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, row, C_POP, label, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, row, C_STATUS, status, err);
    if (st == TF_OK && reason && reason[0])
        st = tf_table_set_text(t, row, nc - 1, reason, err);
    if (st != TF_OK || !s)
        return st;
    size_t ny = tf_series_n_years(s);
    tf_table_set_number(t, row, C_FIRST, tf_series_first_year(s));
    tf_table_set_number(t, row, C_LAST, tf_series_first_year(s) + (double)ny - 1);
    tf_table_set_number(t, row, C_SURVEYED, (double)tf_series_n_surveyed(s));
    if (!pop)
        return TF_OK;
    if ((st = tf_table_set_text(t, row, C_UNIT, tf_sheets_effort_varies(s) ? "per unit of effort" : "animals", err)))
        return st;
    const tf_analysis_year *last = tf_analysis_pop_year(pop, ny - 1);
    const tf_analysis_trend *tr = tf_analysis_pop_trend(pop);
    double v[] = {last->median, last->q025, last->q975, tr->median, tr->q025, tr->q975, tr->p_decline};
    for (size_t k = 0; k < sizeof v / sizeof v[0]; k++)
        tf_table_set_number(t, row, C_ABUND + k, v[k]);
    size_t g = tf_analysis_pop_best_growth(pop);
    const tf_analysis_model *m = tf_analysis_pop_model(pop, tf_analysis_pop_best(pop));
    if ((st = tf_table_set_text(t, row, C_GROWTH, tf_analysis_pop_growth(pop, g)->name, err)) ||
        (st = tf_table_set_text(t, row, C_MODEL, m->name, err)))
        return st;
    tf_table_set_number(t, row, C_GROWTH_P, tf_analysis_pop_growth_probability(pop, g));
    tf_table_set_number(t, row, C_MODEL_P, m->probability);
    const tf_projection *pr = tf_analysis_pop_projection(pop);
    size_t c = C_RISK0, nry = n_risk_years(p);
    for (size_t k = 0; k < p->n_thresholds; k++)
        for (size_t y = 0; y < nry; y++)
            tf_table_set_number(t, row, c++, tf_projection_risk(pr, k, tf_analysis_risk_years[y]));
    for (size_t w = 0; w < n_windows(p); w++)
        for (size_t d = 0; d < p->n_declines; d++)
            tf_table_set_number(t, row, c++, tf_projection_decline_prob(pr, w, d));
    return tf_table_set_text(t, row, c, tf_sheets_all_converged(pop) ? "passed" : "not all passed", err);
}

/* The CSV text of table t: *head its header line, *body its rows, both without the final line
 * end (malloc'd). */
static tf_status csv_text(const tf_table *t, char **head, char **body, tf_error *err)
{
    char *text = NULL;
    size_t len = 0;
    *head = *body = NULL;
    FILE *f = open_memstream(&text, &len);
    if (!f)
        return nomem(err);
    tf_status st = tf_csv_write_stream(t, f, "memory", err);
    if (fclose(f) != 0 || !text) {
        free(text);
        return st != TF_OK ? st : nomem(err);
    }
    /* Headers hold no line break, so the first CRLF ends the header. */
    char *cut = strstr(text, "\r\n");
    if (st == TF_OK && cut) {
        *cut = '\0';
        char *rest = cut + 2;
        size_t n = strlen(rest);
        if (n >= 2 && !strcmp(rest + n - 2, "\r\n"))
            rest[n - 2] = '\0';
        *head = strdup(text);
        *body = strdup(rest);
        if (!*head || !*body) {
            free(*head);
            free(*body);
            *head = *body = NULL;
            st = nomem(err);
        }
    }
    free(text);
    return st;
}

tf_status tf_records_row(const tf_project_options *p, const char *label, const tf_series *s,
                         const tf_analysis_pop *pop, const char *status, const char *reason, char **out, tf_error *err)
{
    *out = NULL;
    tf_table *t = tf_records_table(p, "summary-row", err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    char *head = NULL;
    tf_status st = fill_row(p, t, label, s, pop, status, reason, err);
    if (st == TF_OK)
        st = csv_text(t, &head, out, err);
    free(head);
    tf_table_free(t);
    return st;
}

size_t tf_records_split(const char *s, char **fields, size_t max)
{
    size_t n = 0;
    for (;;) {
        if (n == max)
            return n;
        size_t cap = strlen(s) + 1, k = 0;
        char *f = malloc(cap);
        if (!f)
            goto fail;
        if (*s == '"') {
            s++;
            while (*s && !(*s == '"' && s[1] != '"')) {
                if (*s == '"')
                    s++;
                f[k++] = *s++;
            }
            if (*s == '"')
                s++;
        }
        while (*s && *s != ',')
            f[k++] = *s++;
        f[k] = '\0';
        fields[n++] = f;
        if (*s != ',')
            return n;
        s++;
    }
fail:
    for (size_t i = 0; i < n; i++)
        free(fields[i]);
    return 0;
}

tf_status tf_records_append(tf_table *t, const char *text, tf_error *err)
{
    size_t nc = tf_table_n_columns(t), row;
    char **f = calloc(nc, sizeof *f);
    if (!f)
        return nomem(err);
    size_t n = tf_records_split(text, f, nc);
    tf_status st = n ? tf_table_add_row(t, &row, err) : nomem(err);
    for (size_t j = 0; j < n && st == TF_OK; j++) {
        if (!f[j][0])
            continue;
        char *end;
        double v = tf_table_column_kind(t, j) == TF_COL_TEXT ? NAN : strtod(f[j], &end);
        if (tf_table_column_kind(t, j) != TF_COL_TEXT && *end == '\0')
            tf_table_set_number(t, row, j, v);
        else
            st = tf_table_set_text(t, row, j, f[j], err);
    }
    if (st == TF_OK && n > C_STATUS && strcmp(f[C_STATUS], "done"))
        st = tf_table_set_warning(t, row, C_STATUS, err);
    if (st == TF_OK && n == nc && !strcmp(f[nc - 2], "not all passed"))
        st = tf_table_set_warning(t, row, nc - 2, err);
    for (size_t j = 0; j < n; j++)
        free(f[j]);
    free(f);
    return st;
}

tf_status tf_records_header(const tf_project_options *p, char **out, tf_error *err)
{
    *out = NULL;
    tf_table *t = tf_records_table(p, "all-populations", err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    char *body = NULL;
    tf_status st = csv_text(t, out, &body, err);
    free(body);
    tf_table_free(t);
    return st;
}
