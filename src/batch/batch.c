/* The batch: per-population folders with a completed marker, the settings record that guards a
 * resumed run, the summary rows, and the thread runner; see batch.h. */
#include "batch/batch.h"

#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <pthread.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "analysis/provenance.h"
#include "analysis/sheets.h"
#include "analysis/wording.h"
#include "export/atomic.h"
#include "export/csv_out.h"
#include "export/report.h"
#include "export/table.h"
#include "export/workbook.h"
#include "model/model.h"
#include "project/cautions.h"
#include "util/version.h"

/* Room for a path inside the batch folder. */
#define PATH_BUF 4096
/* The first line of a completed marker. */
static const char MARKER_HEAD[] = "tallyfit batch: population finished";

typedef struct {
    const char *label;               /* borrowed from the survey */
    const tf_series *s;              /* NULL when set aside */
    const tf_survey_rejected *rej;   /* non-NULL when set aside */
    char *folder;
    tf_batch_state state;
    char *reason;                    /* malloc'd; NULL = "" */
    char *row;                       /* the summary line; NULL until settled */
    double seconds;
} item;

struct tf_batch {
    const tf_survey *sv;
    tf_batch_options o;
    char sha256[TF_PROVENANCE_HASH_BUF];
    char date[TF_PROVENANCE_DATE_BUF];
    char *settings;
    char settings_hash[TF_PROVENANCE_HASH_BUF];
    item *items;
    size_t n;
    size_t *todo;
    size_t n_todo, n_resumed;
    int workbooks;                   /* per-population workbooks */
    char *header;                    /* the summary CSV's header line */
};

const char *tf_batch_state_name(tf_batch_state s)
{
    switch (s) {
    case TF_BATCH_DONE: return "done";
    case TF_BATCH_FAILED: return "failed";
    case TF_BATCH_BAD_DATA: return "bad data";
    case TF_BATCH_PENDING: break;
    }
    return "not done";
}

void tf_batch_result_clear(tf_batch_result *res)
{
    free(res->row);
    res->row = NULL;
}

static tf_status nomem(tf_error *err) { return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"); }

/* dir/name into buf; TF_ERR_IO when it does not fit. */
static tf_status join(char *buf, size_t size, const char *dir, const char *name, tf_error *err)
{
    int n = snprintf(buf, size, "%s/%s", dir, name);
    if (n < 0 || (size_t)n >= size)
        return tf_error_add(err, TF_ERR_IO, dir, 0, 0, "choose a shorter -o folder", "the output path is too long");
    return TF_OK;
}

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
static tf_status make_settings(tf_batch *b, tf_error *err)
{
    size_t len = 0;
    FILE *f = open_memstream(&b->settings, &len);
    if (!f)
        return nomem(err);
    const tf_analysis_options *a = &b->o.analysis;
    fputs("# tallyfit batch settings: a run in this folder continues an earlier one only with the same lines\n", f);
    line(f, "program", "tallyfit %s", TF_VERSION);
    line(f, "survey-sha256", "%s", b->sha256);
    line(f, "seed", "%llu", (unsigned long long)a->seed);
    names_line(f, "growth-models", a->growth, a->n_growth, "all");
    if (a->obs_auto)
        line(f, "counting-error", "%s", "all that suit");
    else
        names_line(f, "counting-error", a->obs, a->n_obs, "default");
    line(f, "chains", "%zu", a->fit.n_chains);
    line(f, "kept-draws", "%zu", a->fit.n_iter);
    line(f, "thin", "%zu", a->fit.thin);
    line(f, "warmup", "%zu", a->fit.n_warmup);
    line(f, "particles", "%zu", a->fit.n_particles);
    line(f, "correlated", "%d %.17g", a->fit.correlated, a->fit.rho);
    line(f, "pilot-particles", "%zu", a->fit.pilot_particles);
    line(f, "doublings", "%zu", a->fit.max_doublings);
    const tf_evidence_options *e = &a->evidence;
    line(f, "ml-draws", "%zu", e->n_draws);
    line(f, "ml-adapt", "%zu %zu", e->n_adapt_rounds, e->n_adapt_draws);
    line(f, "ml-mixture", "%.17g %zu %.17g %.17g", e->nu, e->n_components, e->defensive_weight, e->defensive_scale);
    line(f, "ml-check", "%.17g %.17g", e->check_nu, e->check_scale);
    line(f, "ml-particles", "%zu %.17g", e->n_particles, e->target_sd);
    const tf_project_options *p = &a->project;
    line(f, "years", "%zu", p->horizon);
    line(f, "runs", "%zu", p->n_runs);
    fputs("thresholds", f);
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
    line(f, "population-workbooks", "%s", b->workbooks ? "yes" : "no");
    if (b->o.extra_settings && b->o.extra_settings[0]) {
        fputs(b->o.extra_settings, f);
        if (b->o.extra_settings[strlen(b->o.extra_settings) - 1] != '\n')
            fputc('\n', f);
    }
    if (fclose(f) != 0 || !b->settings)
        return nomem(err);
    tf_provenance_hash_bytes(b->settings, strlen(b->settings), b->settings_hash);
    return TF_OK;
}

/* ---- folder names ---- */

/* The label as one folder name that every file system takes: ASCII letters, digits, '-' and '_'
 * kept, '.' kept except first, everything else '_'; "population" for an empty label. */
static void safe_name(const char *label, char *out, size_t size)
{
    size_t k = 0;
    for (const char *p = label; *p && k + 1 < size; p++) {
        char c = *p;
        int ok = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '-' || c == '_' ||
                 (c == '.' && k > 0);
        out[k++] = ok ? c : '_';
    }
    out[k] = '\0';
    if (!k)
        snprintf(out, size, "population");
}

/* Folder names, unique without regard to case (file systems that ignore case would merge
 * "Site-1" and "site-1"): a later population whose name is taken gets "-2", "-3"... in file
 * order, so the same file always gives the same names. */
static tf_status name_folders(tf_batch *b, tf_error *err)
{
    char base[TF_SURVEY_MAX_LABEL + 16], name[TF_SURVEY_MAX_LABEL + 40], dir[PATH_BUF];
    tf_status st = join(dir, sizeof dir, b->o.root, TF_BATCH_POP_DIR, err);
    if (st != TF_OK)
        return st;
    char **names = calloc(b->n, sizeof *names);
    if (!names)
        return nomem(err);
    for (size_t i = 0; i < b->n && st == TF_OK; i++) {
        safe_name(b->items[i].label, base, sizeof base);
        snprintf(name, sizeof name, "%s", base);
        for (unsigned k = 2;; k++) {
            size_t j = 0;
            while (j < i && strcasecmp(names[j], name))
                j++;
            if (j == i)
                break;
            snprintf(name, sizeof name, "%s-%u", base, k);
        }
        char path[PATH_BUF];
        if (!(names[i] = strdup(name)))
            st = nomem(err);
        else if ((st = join(path, sizeof path, dir, name, err)) == TF_OK && !(b->items[i].folder = strdup(path)))
            st = nomem(err);
    }
    for (size_t i = 0; i < b->n; i++)
        free(names[i]);
    free(names);
    return st;
}

/* ---- the summary row ---- */

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

/* An empty summary table: its columns follow from the options alone, so that every population,
 * a failed one too, has the same header. */
static tf_table *summary_table(const tf_batch *b, const char *name, tf_error *err)
{
    const tf_project_options *p = &b->o.analysis.project;
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

/* Fills row 0 of the one-row table t for population i. pop is the analysed population (NULL
 * unless done). */
static tf_status fill_row(const tf_batch *b, tf_table *t, size_t i, const tf_analysis_pop *pop, tf_batch_state state,
                          const char *reason, tf_error *err)
{
    const item *it = &b->items[i];
    size_t nc = tf_table_n_columns(t), row;
    tf_status st = tf_table_add_row(t, &row, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, row, C_POP, it->label, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, row, C_STATUS, tf_batch_state_name(state), err);
    if (st == TF_OK && reason && reason[0])
        st = tf_table_set_text(t, row, nc - 1, reason, err);
    if (st != TF_OK || !it->s)
        return st;
    const tf_series *s = it->s;
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
    const tf_project_options *p = &b->o.analysis.project;
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

/* The summary line of population i (malloc'd in *out). */
static tf_status row_line(const tf_batch *b, size_t i, const tf_analysis_pop *pop, tf_batch_state state,
                          const char *reason, char **out, tf_error *err)
{
    *out = NULL;
    tf_table *t = summary_table(b, "summary-row", err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    char *head = NULL;
    tf_status st = fill_row(b, t, i, pop, state, reason, err);
    if (st == TF_OK)
        st = csv_text(t, &head, out, err);
    free(head);
    tf_table_free(t);
    return st;
}

/* Splits one CSV line as tf_csv_write_stream writes it (RFC 4180 quoting) into at most max
 * fields, each a malloc'd string; returns the number found (0 when out of memory). */
static size_t split_csv(const char *s, char **fields, size_t max)
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

/* Appends line (a summary line) to t as typed cells: text columns as text, the others as the
 * numbers the CSV writer wrote (strtod reads them back exactly). */
static tf_status append_line(tf_table *t, const char *text, tf_error *err)
{
    size_t nc = tf_table_n_columns(t), row;
    char **f = calloc(nc, sizeof *f);
    if (!f)
        return nomem(err);
    size_t n = split_csv(text, f, nc);
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

/* ---- the batch ---- */

tf_status tf_batch_new(const tf_survey *sv, const tf_batch_options *o, tf_batch **out, tf_error *err)
{
    *out = NULL;
    if (!o->analysis.priors)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "batch: no priors callback");
    size_t n = tf_survey_n_series(sv) + tf_survey_n_rejected(sv);
    if (!n)
        return tf_error_add(err, TF_ERR_INVALID, tf_survey_path(sv), 0, 0, NULL, "the survey holds no population");
    tf_batch *b = calloc(1, sizeof *b);
    if (!b)
        return nomem(err);
    b->sv = sv;
    b->o = *o;
    b->n = n;
    b->workbooks = n <= o->workbook_limit;
    tf_status st;
    if (!(b->items = calloc(n, sizeof *b->items)) || !(b->todo = calloc(n, sizeof *b->todo))) {
        st = nomem(err);
        goto fail;
    }
    for (size_t i = 0; i < tf_survey_n_series(sv); i++) {
        item *it = &b->items[tf_survey_series_order(sv, i)];
        it->s = tf_survey_series(sv, i);
        it->label = tf_series_label(it->s);
    }
    for (size_t i = 0; i < tf_survey_n_rejected(sv); i++) {
        const tf_survey_rejected *x = tf_survey_rejected_at(sv, i);
        b->items[x->order].rej = x;
        b->items[x->order].label = x->label;
    }
    if ((st = tf_provenance_hash_file(o->survey_path, b->sha256, err)) != TF_OK)
        goto fail;
    tf_provenance_format_date(tf_provenance_now(), b->date);
    if ((st = make_settings(b, err)) != TF_OK || (st = name_folders(b, err)) != TF_OK)
        goto fail;
    tf_table *t = summary_table(b, "all-populations", err);
    if (!t) {
        st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
        goto fail;
    }
    char *body = NULL;
    st = csv_text(t, &b->header, &body, err);
    free(body);
    tf_table_free(t);
    if (st != TF_OK)
        goto fail;
    *out = b;
    return TF_OK;
fail:
    tf_batch_free(b);
    return st;
}

void tf_batch_free(tf_batch *b)
{
    if (!b)
        return;
    if (b->items)
        for (size_t i = 0; i < b->n; i++) {
            free(b->items[i].folder);
            free(b->items[i].reason);
            free(b->items[i].row);
        }
    free(b->items);
    free(b->todo);
    free(b->settings);
    free(b->header);
    free(b);
}

size_t tf_batch_n_populations(const tf_batch *b) { return b->n; }
const char *tf_batch_label(const tf_batch *b, size_t i) { return b->items[i].label; }
const char *tf_batch_folder(const tf_batch *b, size_t i) { return b->items[i].folder; }
tf_batch_state tf_batch_state_of(const tf_batch *b, size_t i) { return b->items[i].state; }
const char *tf_batch_reason(const tf_batch *b, size_t i) { return b->items[i].reason ? b->items[i].reason : ""; }
const char *tf_batch_settings(const tf_batch *b) { return b->settings; }
size_t tf_batch_n_resumed(const tf_batch *b) { return b->n_resumed; }
size_t tf_batch_n_todo(const tf_batch *b) { return b->n_todo; }
size_t tf_batch_todo(const tf_batch *b, size_t k) { return b->todo[k]; }

size_t tf_batch_count(const tf_batch *b, tf_batch_state s)
{
    size_t n = 0;
    for (size_t i = 0; i < b->n; i++)
        n += b->items[i].state == s;
    return n;
}

void tf_batch_record(tf_batch *b, tf_batch_result *res)
{
    if (res->index >= b->n)
        return;
    item *it = &b->items[res->index];
    it->state = res->state;
    it->seconds = res->seconds;
    free(it->reason);
    it->reason = res->reason[0] ? strdup(res->reason) : NULL;
    free(it->row);
    it->row = res->row;
    res->row = NULL;
}

/* ---- files ---- */

/* The whole of a small file (malloc'd, NUL-terminated), or NULL when it cannot be read. */
static char *slurp(const char *path)
{
    FILE *f = fopen(path, "rb");
    if (!f)
        return NULL;
    char *buf = NULL;
    size_t len = 0;
    FILE *m = open_memstream(&buf, &len);
    char chunk[8192];
    size_t k;
    while (m && (k = fread(chunk, 1, sizeof chunk, f)) > 0)
        fwrite(chunk, 1, k, m);
    int bad = ferror(f);
    fclose(f);
    if (!m || fclose(m) != 0 || bad) {
        free(buf);
        return NULL;
    }
    return buf;
}

/* Writes text to path atomically. */
static tf_status write_text(const char *path, const char *text, const char *protect, tf_error *err)
{
    tf_atomic *a;
    tf_status st = tf_atomic_open(path, protect, &a, err);
    if (st != TF_OK)
        return st;
    fputs(text, tf_atomic_stream(a));
    return tf_atomic_commit(a, err);
}

/* The first line where two texts differ, for the mismatch message. */
static void first_difference(const char *a, const char *b, char *was, char *now, size_t size)
{
    while (*a && *b) {
        size_t la = strcspn(a, "\n"), lb = strcspn(b, "\n");
        if (la != lb || memcmp(a, b, la)) {
            snprintf(was, size, "%.*s", (int)la, a);
            snprintf(now, size, "%.*s", (int)lb, b);
            return;
        }
        a += la + (a[la] == '\n');
        b += lb + (b[lb] == '\n');
    }
    snprintf(was, size, "%.*s", (int)strcspn(a, "\n"), *a ? a : "(nothing)");
    snprintf(now, size, "%.*s", (int)strcspn(b, "\n"), *b ? b : "(nothing)");
}

/* Reads population i's completed marker and summary row: 1 when it is settled under these
 * settings (the item then holds its state, reason, row and seconds), 0 otherwise. */
static int read_finished(tf_batch *b, size_t i)
{
    item *it = &b->items[i];
    char path[PATH_BUF];
    if (join(path, sizeof path, it->folder, TF_BATCH_MARKER, NULL) != TF_OK)
        return 0;
    char *marker = slurp(path);
    if (!marker)
        return 0;
    char want[128];
    snprintf(want, sizeof want, "%s\nsettings %s\n", MARKER_HEAD, b->settings_hash);
    int ok = !strncmp(marker, want, strlen(want));
    double seconds = 0;
    const char *sec = strstr(marker, "\nseconds ");
    if (sec)
        seconds = strtod(sec + 9, NULL);
    free(marker);
    char *rows = NULL;
    if (!ok || join(path, sizeof path, it->folder, TF_BATCH_ROW_CSV, NULL) != TF_OK || !(rows = slurp(path)))
        return 0;
    /* The file is the header, CRLF, the row, CRLF: the same header as now, one row. */
    size_t hl = strlen(b->header), len = strlen(rows);
    ok = len > hl + 4 && !strncmp(rows, b->header, hl) && !strncmp(rows + hl, "\r\n", 2) &&
         !strcmp(rows + len - 2, "\r\n");
    if (ok) {
        rows[len - 2] = '\0';
        const char *line = rows + hl + 2;
        ok = !strstr(line, "\r\n");
        char *f[3] = {0};
        size_t n = ok ? split_csv(line, f, 2) : 0;
        ok = n == 2 && !strcmp(f[0], it->label);
        tf_batch_state st = TF_BATCH_PENDING;
        for (int s = TF_BATCH_DONE; ok && s <= TF_BATCH_BAD_DATA; s++)
            if (!strcmp(f[1], tf_batch_state_name((tf_batch_state)s)))
                st = (tf_batch_state)s;
        for (size_t k = 0; k < n; k++)
            free(f[k]);
        if (ok && st != TF_BATCH_PENDING && (it->row = strdup(line))) {
            it->state = st;
            it->seconds = seconds;
            /* The reason is the last field. */
            tf_table *t = summary_table(b, "r", NULL);
            if (t && append_line(t, line, NULL) == TF_OK && tf_table_n_rows(t) == 1) {
                const char *r = tf_table_text(t, 0, tf_table_n_columns(t) - 1);
                it->reason = r ? strdup(r) : NULL;
            }
            tf_table_free(t);
        } else {
            ok = 0;
        }
    }
    free(rows);
    return ok;
}

/* Removes what an earlier batch left in one population folder, then the folder if empty: the
 * tables named in its contents file, its workbook, its summary row and its marker. Nothing else
 * is touched. */
static void clear_folder(const char *dir, const char *name)
{
    char path[PATH_BUF];
    if (join(path, sizeof path, dir, "contents.csv", NULL) == TF_OK) {
        char *text = slurp(path);
        for (char *p = text, *next; p && *p; p = next) {
            next = strstr(p, "\r\n");
            if (next)
                *next = '\0', next += 2;
            else
                next = p + strlen(p);
            char *f[1] = {0};
            /* Only plain file names: a contents file cannot send this anywhere else. */
            if (split_csv(p, f, 1) == 1 && !strchr(f[0], '/') && strcmp(f[0], "..") && strcmp(f[0], ".") &&
                join(path, sizeof path, dir, f[0], NULL) == TF_OK)
                unlink(path);
            free(f[0]);
        }
        free(text);
        if (join(path, sizeof path, dir, "contents.csv", NULL) == TF_OK)
            unlink(path);
    }
    char wb[PATH_BUF];
    snprintf(wb, sizeof wb, "%s.xlsx", name);
    const char *files[] = {TF_BATCH_ROW_CSV, TF_BATCH_MARKER, wb};
    for (size_t k = 0; k < sizeof files / sizeof files[0]; k++)
        if (join(path, sizeof path, dir, files[k], NULL) == TF_OK)
            unlink(path);
    rmdir(dir);
}

/* --fresh: every population folder of the earlier batch that carries a marker or contents file. */
static void clear_earlier(const tf_batch *b)
{
    char dir[PATH_BUF], sub[PATH_BUF], probe[PATH_BUF];
    if (join(dir, sizeof dir, b->o.root, TF_BATCH_POP_DIR, NULL) != TF_OK)
        return;
    DIR *d = opendir(dir);
    if (!d)
        return;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (e->d_name[0] == '.' || join(sub, sizeof sub, dir, e->d_name, NULL) != TF_OK)
            continue;
        struct stat info;
        int ours = (join(probe, sizeof probe, sub, TF_BATCH_MARKER, NULL) == TF_OK && stat(probe, &info) == 0) ||
                   (join(probe, sizeof probe, sub, "contents.csv", NULL) == TF_OK && stat(probe, &info) == 0);
        if (ours)
            clear_folder(sub, e->d_name);
    }
    closedir(d);
}

tf_status tf_batch_prepare(tf_batch *b, tf_error *err)
{
    char path[PATH_BUF];
    tf_status st;
    if ((st = tf_atomic_mkdirs(b->o.root, NULL, err)) != TF_OK ||
        (st = join(path, sizeof path, b->o.root, TF_BATCH_SETTINGS, err)) != TF_OK)
        return st;
    char *earlier = slurp(path);
    if (earlier && strcmp(earlier, b->settings)) {
        if (!b->o.fresh) {
            char was[256], now[256];
            first_difference(earlier, b->settings, was, now, sizeof was);
            free(earlier);
            return tf_error_add(err, TF_ERR_USAGE, path, 0, 0,
                                "run the same command as before to continue that batch, add --fresh to discard its "
                                "results, or choose another -o folder",
                                "the folder holds a batch made with other settings: it has '%s', this run has '%s'",
                                was, now);
        }
        clear_earlier(b);
    }
    free(earlier);
    char dir[PATH_BUF];
    if ((st = join(dir, sizeof dir, b->o.root, TF_BATCH_POP_DIR, err)) != TF_OK ||
        (st = tf_atomic_mkdirs(dir, NULL, err)) != TF_OK ||
        (st = write_text(path, b->settings, b->o.survey_path, err)) != TF_OK)
        return st;
    b->n_todo = b->n_resumed = 0;
    for (size_t i = 0; i < b->n; i++) {
        if (b->items[i].state == TF_BATCH_PENDING && read_finished(b, i))
            b->n_resumed++;
        if (b->items[i].state == TF_BATCH_PENDING)
            b->todo[b->n_todo++] = i;
    }
    /* Longest first (see batch.h); insertion sort keeps ties in file order. */
    for (size_t k = 1; k < b->n_todo; k++) {
        size_t v = b->todo[k], j = k;
        size_t nv = b->items[v].s ? tf_series_n_years(b->items[v].s) : 0;
        while (j > 0) {
            const item *u = &b->items[b->todo[j - 1]];
            if ((u->s ? tf_series_n_years(u->s) : 0) >= nv)
                break;
            b->todo[j] = b->todo[j - 1];
            j--;
        }
        b->todo[j] = v;
    }
    return TF_OK;
}

/* ---- one population ---- */

/* The columns a table has in every population's folder, so that the same table of every
 * population concatenates under one header: the counts table gains its effort columns only
 * where effort varies, and the draws table has a column per parameter of the fitted models, so
 * for these two the batch writes every column that any population can have (blank where it
 * does not apply). Other tables have the same columns everywhere already. Writes at most max
 * headers into out; returns their number, 0 for "the table's own columns". */
static size_t canonical_columns(const char *table, const char **out, size_t max)
{
    static const char *const counts[] = {"Year",     "Count",      "Effort",     "Count per effort", "Estimate",
                                         "Lower 50 %", "Upper 50 %", "Lower 95 %", "Upper 95 %"};
    size_t n = 0;
    if (!strcmp(table, "Counts")) {
        for (; n < sizeof counts / sizeof counts[0] && n < max; n++)
            out[n] = counts[n];
        return n;
    }
    if (strcmp(table, "Draws"))
        return 0;
    static const char *const head[] = {"Model", "Chain", "Draw", "Log-likelihood"};
    for (size_t k = 0; k < 4 && n < max; k++)
        out[n++] = head[k];
    /* Parameters in the joined models' order: drift parameters, sigma, counting error. */
    const char *names[64];
    size_t nn = 0;
    for (size_t g = 0; g < tf_model_n_growth(); g++)
        for (size_t k = 0; k < tf_model_growth_at(g)->n_params && nn < 63; k++)
            names[nn++] = tf_model_growth_at(g)->param_names[k];
    names[nn++] = "sigma";
    for (size_t o = 0; o < tf_model_n_obs(); o++)
        for (size_t k = 0; k < tf_model_obs_at(o)->n_params && nn < 64; k++)
            names[nn++] = tf_model_obs_at(o)->param_names[k];
    for (size_t k = 0; k < nn && n < max; k++) {
        size_t j = 4;
        while (j < n && strcmp(out[j], names[k]))
            j++;
        if (j == n)
            out[n++] = names[k];
    }
    if (n < max)
        out[n++] = "Last-year abundance";
    return n;
}

/* A copy of t with a first column Population holding label in every row and the canonical
 * columns of its kind (see canonical_columns), each cell copied from the column of the same
 * header; a column of t outside the canonical ones (none, short of a bug) comes last. */
static tf_table *with_population(const tf_table *t, const char *label, tf_error *err)
{
    tf_table *c = tf_table_new(tf_table_name(t), err);
    if (!c)
        return NULL;
    size_t nc = tf_table_n_columns(t), nr = tf_table_n_rows(t);
    const char *want[96];
    size_t nw = canonical_columns(tf_table_name(t), want, sizeof want / sizeof want[0]);
    size_t map[96 + 64], n_out = 0;   /* map[k]: the column of t shown as column k + 1, or NONE */
    const size_t NONE = TF_TABLE_NO_COLUMN;
    tf_status st = tf_table_add_column(c, "Population", "the population's label", TF_COL_TEXT, NULL, err);
    for (size_t k = 0; k < nw && st == TF_OK; k++) {
        size_t j = tf_table_find_column(t, want[k]);
        if (j != NONE) {
            const char *legend = tf_table_legend(t, j);
            st = tf_table_add_column(c, want[k], legend[0] ? legend : NULL, tf_table_column_kind(t, j), NULL, err);
        } else {
            char legend[128];
            snprintf(legend, sizeof legend, "%s (blank: does not apply to this population)", want[k]);
            st = tf_table_add_column(c, want[k], legend, TF_COL_NUMBER, NULL, err);
        }
        map[n_out++] = j;
    }
    for (size_t j = 0; j < nc && st == TF_OK && n_out < sizeof map / sizeof map[0]; j++) {
        size_t k = 0;
        while (k < nw && strcmp(want[k], tf_table_header(t, j)))
            k++;
        if (nw && k < nw)
            continue;
        const char *legend = tf_table_legend(t, j);
        st = tf_table_add_column(c, tf_table_header(t, j), legend[0] ? legend : NULL, tf_table_column_kind(t, j), NULL,
                                 err);
        map[n_out++] = j;
    }
    for (size_t k = 0; k < tf_table_n_notes(t) && st == TF_OK; k++)
        st = tf_table_add_note(c, tf_table_note_kind(t, k), tf_table_note(t, k), err);
    for (size_t i = 0; i < nr && st == TF_OK; i++) {
        size_t row;
        if ((st = tf_table_add_row(c, &row, err)) != TF_OK || (st = tf_table_set_text(c, row, 0, label, err)) != TF_OK)
            break;
        for (size_t k = 0; k < n_out && st == TF_OK; k++) {
            size_t j = map[k];
            if (j == NONE)
                continue;
            const char *text = tf_table_text(t, i, j);
            if (text)
                st = tf_table_set_text(c, row, k + 1, text, err);
            else if (!tf_table_is_empty(t, i, j))
                tf_table_set_number(c, row, k + 1, tf_table_number(t, i, j));
            if (st == TF_OK && tf_table_cell_kind(t, i, j) != tf_table_column_kind(t, j))
                st = tf_table_set_cell_kind(c, row, k + 1, tf_table_cell_kind(t, i, j), err);
            if (st == TF_OK && tf_table_warning(t, i, j))
                st = tf_table_set_warning(c, row, k + 1, err);
        }
    }
    if (st != TF_OK) {
        tf_table_free(c);
        return NULL;
    }
    return c;
}

/* The population's tables as CSV files (with the Population column), its contents file and its
 * summary row, written together, all or none. */
static tf_status write_tables(const tf_batch *b, const item *it, const tf_report *r, const char *row_text,
                              tf_error *err)
{
    size_t nt = r ? tf_report_n_tables(r) : 0, n = 0;
    tf_table **tables = calloc(nt + 2, sizeof *tables);
    tf_table *contents = tf_table_new("contents", err), *row = NULL;
    tf_status st = tables && contents ? TF_OK : nomem(err);
    if (st == TF_OK)
        st = tf_table_add_column(contents, "file", "the CSV file", TF_COL_TEXT, NULL, err);
    if (st == TF_OK)
        st = tf_table_add_column(contents, "table", "what it holds", TF_COL_TEXT, NULL, err);
    for (size_t k = 0; k < nt && st == TF_OK; k++) {
        const tf_table *t = tf_report_table(r, k);
        /* The one-row overview of the analysis: the summary row replaces it. */
        if (!strcmp(tf_table_name(t), "All populations"))
            continue;
        if (!(tables[n] = with_population(t, it->label, err))) {
            st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
            break;
        }
        char file[128];
        tf_csv_file_name(tf_table_name(t), file, sizeof file);
        size_t cr;
        if ((st = tf_table_add_row(contents, &cr, err)) == TF_OK && (st = tf_table_set_text(contents, cr, 0, file, err)) == TF_OK)
            st = tf_table_set_text(contents, cr, 1, tf_table_name(t), err);
        n++;
    }
    if (st == TF_OK && !(row = summary_table(b, "summary-row", err)))
        st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    if (st == TF_OK)
        st = append_line(row, row_text, err);
    size_t cr;
    if (st == TF_OK && (st = tf_table_add_row(contents, &cr, err)) == TF_OK &&
        (st = tf_table_set_text(contents, cr, 0, TF_BATCH_ROW_CSV, err)) == TF_OK)
        st = tf_table_set_text(contents, cr, 1, "the population's row of the batch summary", err);
    if (st == TF_OK) {
        tables[n++] = row;
        row = NULL;
        tables[n++] = contents;
        contents = NULL;
        st = tf_csv_write_all((const tf_table *const *)tables, n, it->folder, b->o.survey_path, err);
    }
    for (size_t k = 0; tables && k < n; k++)
        tf_table_free(tables[k]);
    free(tables);
    tf_table_free(contents);
    tf_table_free(row);
    return st;
}

static tf_status write_marker(const tf_batch *b, const item *it, tf_batch_state state, double seconds, tf_error *err)
{
    char path[PATH_BUF], text[1024];
    tf_status st = join(path, sizeof path, it->folder, TF_BATCH_MARKER, err);
    if (st != TF_OK)
        return st;
    snprintf(text, sizeof text, "%s\nsettings %s\nstate %s\nseconds %.3f\n", MARKER_HEAD, b->settings_hash,
             tf_batch_state_name(state), seconds);
    return write_text(path, text, b->o.survey_path, err);
}

static double seconds_since(const struct timespec *t0)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)(t.tv_sec - t0->tv_sec) + 1e-9 * (double)(t.tv_nsec - t0->tv_nsec);
}

/* Whether a failed analysis is the population's own (its data or its fits), to be recorded, or
 * the machine's (memory, files, a signal), which stops the batch. */
static int population_failure(tf_status st)
{
    return st != TF_ERR_NOMEM && st != TF_ERR_IO && st != TF_ERR_INTERRUPTED;
}

tf_status tf_batch_run_one(const tf_batch *b, size_t i, size_t n_threads, const volatile sig_atomic_t *stop,
                           tf_batch_result *res, tf_error *err)
{
    memset(res, 0, sizeof *res);
    res->index = i;
    if (i >= b->n)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "batch: no population %zu", i);
    const item *it = &b->items[i];
    struct timespec t0;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    char path[PATH_BUF];
    tf_status st;
    /* An old marker goes first, so that a crash while the new files are written never leaves a
     * marker beside them. */
    if ((st = tf_atomic_mkdirs(it->folder, NULL, err)) != TF_OK ||
        (st = join(path, sizeof path, it->folder, TF_BATCH_MARKER, err)) != TF_OK)
        return st;
    if (unlink(path) != 0 && errno != ENOENT)
        return tf_error_add(err, TF_ERR_IO, path, 0, 0, NULL, "cannot remove the old marker: %s", strerror(errno));

    tf_analysis *a = NULL;
    tf_report *r = NULL;
    if (it->rej) {
        res->state = TF_BATCH_BAD_DATA;
        const tf_survey_rejected *x = it->rej;
        char more[64] = "";
        if (x->n_problems > 1)
            snprintf(more, sizeof more, " (and %zu more problem%s)", x->n_problems - 1, x->n_problems > 2 ? "s" : "");
        if (x->column)
            snprintf(res->reason, sizeof res->reason, "line %ld, field %ld: %s%s", x->line, x->column, x->what, more);
        else
            snprintf(res->reason, sizeof res->reason, "line %ld: %s%s", x->line, x->what, more);
    } else {
        tf_analysis_options o = b->o.analysis;
        o.population = it->label;
        o.n_threads = n_threads ? n_threads : 1;
        tf_error mine;
        tf_error_init(&mine);
        st = tf_analysis_run(b->sv, &o, stop, NULL, NULL, &a, &mine);
        if (st != TF_OK && !population_failure(st)) {
            for (size_t k = 0; k < mine.n_items; k++) {
                const tf_error_item *e = &mine.items[k];
                tf_error_add(err, e->status, e->file[0] ? e->file : NULL, e->line, e->column,
                             e->hint[0] ? e->hint : NULL, "%s", e->what);
            }
            return st;
        }
        if (st != TF_OK) {
            res->state = TF_BATCH_FAILED;
            const tf_error_item *e = &mine.items[0];
            if (e->hint[0])
                snprintf(res->reason, sizeof res->reason, "%s (%s)", e->what, e->hint);
            else
                snprintf(res->reason, sizeof res->reason, "%s", e->what);
        } else {
            res->state = TF_BATCH_DONE;
            tf_sheets_provenance prov = {.input_name = b->o.survey_path, .title = b->o.title, .omit_seconds = 1};
            memcpy(prov.sha256, b->sha256, sizeof prov.sha256);
            memcpy(prov.date, b->date, sizeof prov.date);
            if (!(r = tf_report_new(err)) || (st = tf_sheets_build(a, &prov, r, err)) != TF_OK)
                goto fail;
        }
    }
    const tf_analysis_pop *pop = a ? tf_analysis_population(a, 0) : NULL;
    if ((st = row_line(b, i, pop, res->state, res->reason, &res->row, err)) != TF_OK)
        goto fail;
    if (r && b->workbooks) {
        char wb[PATH_BUF];
        const char *name = strrchr(it->folder, '/') + 1;
        int k = snprintf(wb, sizeof wb, "%s/%s.xlsx", it->folder, name);
        if (k < 0 || (size_t)k >= sizeof wb) {
            st = tf_error_add(err, TF_ERR_IO, it->folder, 0, 0, NULL, "the output path is too long");
            goto fail;
        }
        if ((st = tf_report_write(r, wb, NULL, b->o.survey_path, stop, err)) != TF_OK)
            goto fail;
    }
    if ((st = write_tables(b, it, r, res->row, err)) != TF_OK)
        goto fail;
    if (stop && *stop) {
        st = tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
        goto fail;
    }
    res->seconds = seconds_since(&t0);
    if ((st = write_marker(b, it, res->state, res->seconds, err)) != TF_OK)
        goto fail;
    tf_report_free(r);
    tf_analysis_free(a);
    return TF_OK;
fail:
    tf_batch_result_clear(res);
    tf_report_free(r);
    tf_analysis_free(a);
    return st;
}

void tf_batch_notify(tf_batch_progress_fn fn, void *ctx, const tf_batch *b, const tf_batch_event *e)
{
    (void)b;
    if (fn)
        fn(ctx, e);
}

/* ---- the thread runner ---- */

typedef struct {
    tf_batch *b;
    pthread_mutex_t lock;
    size_t next;                 /* into b->todo */
    size_t per_population;       /* threads for each population's chains */
    size_t n_settled;
    const volatile sig_atomic_t *stop;
    tf_batch_progress_fn progress;
    void *ctx;
    tf_status fatal;
    tf_error fatal_err;
} pool;

typedef struct {
    pool *p;
    int id;
} worker_arg;

static void *worker(void *arg)
{
    worker_arg *w = arg;
    pool *p = w->p;
    for (;;) {
        pthread_mutex_lock(&p->lock);
        if (p->fatal != TF_OK || (p->stop && *p->stop) || p->next >= p->b->n_todo) {
            pthread_mutex_unlock(&p->lock);
            return NULL;
        }
        size_t i = p->b->todo[p->next++];
        tf_batch_event ev = {.index = i, .label = p->b->items[i].label, .n_settled = p->n_settled,
                             .n_populations = p->b->n, .worker = w->id};
        tf_batch_notify(p->progress, p->ctx, p->b, &ev);
        pthread_mutex_unlock(&p->lock);

        tf_batch_result res;
        tf_error err;
        tf_error_init(&err);
        tf_status st = tf_batch_run_one(p->b, i, p->per_population, p->stop, &res, &err);

        pthread_mutex_lock(&p->lock);
        if (st == TF_OK) {
            p->n_settled++;
            tf_batch_event done = {.finished = 1, .index = i, .label = p->b->items[i].label, .state = res.state,
                                   .reason = res.reason, .seconds = res.seconds, .n_settled = p->n_settled,
                                   .n_populations = p->b->n, .worker = w->id};
            tf_batch_record(p->b, &res);
            tf_batch_notify(p->progress, p->ctx, p->b, &done);
        } else if (st != TF_ERR_INTERRUPTED && p->fatal == TF_OK) {
            p->fatal = st;
            p->fatal_err = err;
        }
        pthread_mutex_unlock(&p->lock);
    }
}

tf_status tf_batch_run_threads(tf_batch *b, size_t n_workers, const volatile sig_atomic_t *stop,
                               tf_batch_progress_fn progress, void *ctx, tf_error *err)
{
    if (n_workers < 1)
        n_workers = 1;
    size_t used = n_workers < b->n_todo ? n_workers : b->n_todo;
    pool p = {.b = b, .stop = stop, .progress = progress, .ctx = ctx, .fatal = TF_OK,
              .n_settled = b->n - b->n_todo};
    tf_error_init(&p.fatal_err);
    /* Fewer populations than threads: each gets its share for its chains (the numbers do not
     * depend on it). */
    p.per_population = used ? n_workers / used : 1;
    if (used == 0)
        return TF_OK;
    if (pthread_mutex_init(&p.lock, NULL) != 0)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "cannot make a lock");
    pthread_t *th = calloc(used, sizeof *th);
    worker_arg *args = calloc(used, sizeof *args);
    size_t started = 0;
    tf_status st = TF_OK;
    if (!th || !args) {
        st = nomem(err);
    } else {
        for (; started < used; started++) {
            args[started] = (worker_arg){&p, (int)started + 1};
            if (pthread_create(&th[started], NULL, worker, &args[started]) != 0)
                break;
        }
        if (started == 0)
            st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "cannot start a thread");
        for (size_t k = 0; k < started; k++)
            pthread_join(th[k], NULL);
    }
    pthread_mutex_destroy(&p.lock);
    free(th);
    free(args);
    if (st != TF_OK)
        return st;
    if (p.fatal != TF_OK) {
        for (size_t k = 0; k < p.fatal_err.n_items; k++) {
            const tf_error_item *e = &p.fatal_err.items[k];
            tf_error_add(err, e->status, e->file[0] ? e->file : NULL, e->line, e->column, e->hint[0] ? e->hint : NULL,
                         "%s", e->what);
        }
        return p.fatal;
    }
    if (tf_batch_count(b, TF_BATCH_PENDING))
        return tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
    return TF_OK;
}

/* ---- the combined outputs ---- */

static tf_status about_table(const tf_batch *b, tf_table **out, tf_error *err)
{
    tf_status st = TF_OK;
    tf_table *t = tf_table_new_summary("About", err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    char text[PATH_BUF + 64];
#define TRY(call)                                                                                                      \
    do {                                                                                                               \
        if (st == TF_OK)                                                                                               \
            st = (call);                                                                                               \
    } while (0)
    TRY(tf_table_add_notef(t, TF_NOTE_INFO, err,
                           "A batch analysis of the survey %s: one row per population on the Populations sheet, "
                           "its tables in its own folder.",
                           b->o.title));
    for (size_t i = 0; i < tf_project_n_cautions(); i++)
        TRY(tf_table_add_note(t, TF_NOTE_CAUTION, tf_project_caution(i), err));
    TRY(tf_table_add_heading(t, "Populations", err));
    TRY(tf_table_add_item_number(t, "In the survey", (double)b->n, TF_COL_INTEGER, NULL, err));
    static const tf_batch_state states[] = {TF_BATCH_DONE, TF_BATCH_FAILED, TF_BATCH_BAD_DATA, TF_BATCH_PENDING};
    static const char *const notes[] = {NULL, "every fit failed or no model suits the counts: see Reason",
                                        "rows of the survey file are invalid: see Reason",
                                        "run the same command again to finish them"};
    for (size_t k = 0; k < sizeof states / sizeof states[0]; k++) {
        size_t n = tf_batch_count(b, states[k]);
        snprintf(text, sizeof text, "%c%s", tf_batch_state_name(states[k])[0] - 'a' + 'A',
                 tf_batch_state_name(states[k]) + 1);
        TRY(tf_table_add_item_number(t, text, (double)n, TF_COL_INTEGER, n ? notes[k] : NULL, err));
        if (n && states[k] != TF_BATCH_DONE && st == TF_OK)
            st = tf_table_set_warning(t, tf_table_n_rows(t) - 1, TF_TABLE_WHOLE_ROW, err);
    }
    snprintf(text, sizeof text, "%s/%s/<population>/", b->o.root, TF_BATCH_POP_DIR);
    TRY(tf_table_add_item_text(t, "Tables of each population", text,
                               b->workbooks ? "CSV files and a workbook per population" : "CSV files", err));
    TRY(tf_table_add_heading(t, "How this was made", err));
    TRY(tf_table_add_item_text(t, "Survey file", b->o.survey_path, NULL, err));
    TRY(tf_table_add_item_text(t, "SHA-256 of the file", b->sha256, "identifies the exact file that was read", err));
    TRY(tf_table_add_item_text(t, "Program", "tallyfit " TF_VERSION, NULL, err));
    TRY(tf_table_add_item_text(t, "Summary written", b->date, NULL, err));
    snprintf(text, sizeof text, "%s/%s", b->o.root, TF_BATCH_SETTINGS);
    TRY(tf_table_add_item_text(t, "Settings", text,
                               "every setting that changes a number; the same seed and settings give the same numbers, "
                               "whatever the number of threads or processes",
                               err));
#undef TRY
    if (st != TF_OK) {
        tf_table_free(t);
        return st;
    }
    *out = t;
    return TF_OK;
}

tf_status tf_batch_write_summary(const tf_batch *b, const volatile sig_atomic_t *stop, tf_error *err)
{
    char path[PATH_BUF];
    char *csv = NULL, *times = NULL;
    size_t len = 0, tlen = 0;
    tf_table *rows = NULL, *about = NULL;
    tf_workbook *wb = NULL;
    tf_status st = TF_OK;
    FILE *f = open_memstream(&csv, &len), *g = open_memstream(&times, &tlen);
    if (!f || !g) {
        st = nomem(err);
        goto done;
    }
    if (!(rows = summary_table(b, "Populations", err))) {
        st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
        goto done;
    }
    tf_table_set_filter(rows, 1);
    fprintf(f, "%s\r\n", b->header);
    fputs("Population,Status,Seconds\r\n", g);
    for (size_t i = 0; i < b->n && st == TF_OK; i++) {
        const item *it = &b->items[i];
        char *pending = NULL;
        const char *line = it->row;
        if (!line) {
            if ((st = row_line(b, i, NULL, TF_BATCH_PENDING, NULL, &pending, err)) != TF_OK)
                break;
            line = pending;
        }
        fprintf(f, "%s\r\n", line);
        st = append_line(rows, line, err);
        /* The label as the summary writes it (quoted when it must be): the first field. */
        size_t k = 0;
        for (int q = 0; line[k] && (q || line[k] != ','); k++)
            if (line[k] == '"')
                q = !q;
        char num[TF_CSV_NUMBER_MAX];
        if (it->state == TF_BATCH_PENDING)
            num[0] = '\0';
        else
            tf_csv_format_number(it->seconds, num, sizeof num);
        fprintf(g, "%.*s,%s,%s\r\n", (int)k, line, tf_batch_state_name(it->state), num);
        free(pending);
    }
    if (fclose(f) != 0 || fclose(g) != 0) {
        f = g = NULL;
        st = st != TF_OK ? st : nomem(err);
        goto done;
    }
    f = g = NULL;
    if (st != TF_OK)
        goto done;
    tf_table_add_note(rows, TF_NOTE_INFO,
                      "One row per population, in the order of the survey file; use the buttons on the row above "
                      "the data to sort or filter.",
                      NULL);
    if ((st = about_table(b, &about, err)) != TF_OK)
        goto done;
    if (stop && *stop) {
        st = tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
        goto done;
    }
    /* The workbook first, then the CSV twins, as the single report does. */
    if (!(wb = tf_workbook_new(b->o.workbook, b->o.survey_path, err))) {
        st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_IO;
        goto done;
    }
    if ((st = tf_workbook_add_table(wb, rows, NULL, err)) != TF_OK ||
        (st = tf_workbook_add_table(wb, about, NULL, err)) != TF_OK) {
        goto done;
    }
    st = tf_workbook_close(wb, err);
    wb = NULL;
    if (st != TF_OK)
        goto done;
    if ((st = join(path, sizeof path, b->o.root, TF_BATCH_SUMMARY_CSV, err)) != TF_OK ||
        (st = write_text(path, csv, b->o.survey_path, err)) != TF_OK)
        goto done;
    if ((st = join(path, sizeof path, b->o.root, TF_BATCH_TIMINGS_CSV, err)) == TF_OK)
        st = write_text(path, times, b->o.survey_path, err);
done:
    if (f)
        fclose(f);
    if (g)
        fclose(g);
    tf_workbook_free(wb);
    tf_table_free(rows);
    tf_table_free(about);
    free(csv);
    free(times);
    return st;
}

/* ---- results between processes ---- */

/* Fields separated by NUL bytes: a tag, the index, the state, the seconds, the reason, the
 * row. None of them holds a NUL. */
static const char PACK_TAG[] = "tallyfit-result-1";

tf_status tf_batch_result_pack(const tf_batch_result *res, char **out, size_t *len, tf_error *err)
{
    *out = NULL;
    FILE *f = open_memstream(out, len);
    if (!f)
        return nomem(err);
    fprintf(f, "%s%c%zu%c%d%c%.17g%c%s%c%s", PACK_TAG, 0, res->index, 0, (int)res->state, 0, res->seconds, 0,
            res->reason, 0, res->row ? res->row : "");
    fputc(0, f);
    if (fclose(f) != 0 || !*out) {
        free(*out);
        *out = NULL;
        return nomem(err);
    }
    return TF_OK;
}

tf_status tf_batch_result_unpack(const char *data, size_t len, tf_batch_result *res, tf_error *err)
{
    memset(res, 0, sizeof *res);
    const char *field[6];
    size_t n = 0, at = 0;
    while (n < 6 && at < len) {
        const char *end = memchr(data + at, 0, len - at);
        if (!end)
            break;
        field[n++] = data + at;
        at = (size_t)(end - data) + 1;
    }
    char *e1, *e2, *e3;
    unsigned long long index = n == 6 ? strtoull(field[1], &e1, 10) : 0;
    long state = n == 6 ? strtol(field[2], &e2, 10) : -1;
    double seconds = n == 6 ? strtod(field[3], &e3) : NAN;
    if (n != 6 || strcmp(field[0], PACK_TAG) || *e1 || *e2 || *e3 || state < TF_BATCH_PENDING ||
        state > TF_BATCH_BAD_DATA)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "batch: a garbled result message");
    res->index = (size_t)index;
    res->state = (tf_batch_state)state;
    res->seconds = seconds;
    snprintf(res->reason, sizeof res->reason, "%s", field[4]);
    if (field[5][0] && !(res->row = strdup(field[5])))
        return nomem(err);
    return TF_OK;
}
