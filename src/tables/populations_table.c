/* The table of one row per population; see populations_table.h. */
#include "tables/populations_table.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis/wording.h"
#include "export/csv_out.h"
#include "tables/columns.h"
#include "tables/fit_tables.h"

static tf_status nomem(tf_error *err) { return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory"); }

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
    C_CHANGE_HI, C_PDEC, C_RECENT_FIRST, C_RECENT, C_RECENT_LO, C_RECENT_HI, C_RECENT_PDEC, C_GROWTH, C_GROWTH_P,
    C_MODEL, C_MODEL_P, C_RISK0 /* then risks, declines, checks, reason */
};

int tf_populations_all_converged(const tf_analysis_pop *p)
{
    for (size_t i = 0; i < tf_analysis_pop_n_models(p); i++) {
        const tf_analysis_model *m = tf_analysis_pop_model(p, i);
        if (m->fit && !tf_fit_converged(m->fit))
            return 0;
    }
    return 1;
}

tf_table *tf_populations_table_new(const tf_project_options *p, const char *name, tf_error *err)
{
    tf_table *t = tf_table_new(name, err);
    if (!t)
        return NULL;
    tf_status st = TF_OK;
#define COL(id, legend)                                                                                                \
    do {                                                                                                               \
        if (st == TF_OK)                                                                                               \
            st = tf_columns_add(t, id, legend, NULL, err);                                                             \
    } while (0)
#define OTHER(name, label, legend, kind)                                                                               \
    do {                                                                                                               \
        if (st == TF_OK)                                                                                               \
            st = tf_columns_add_other(t, name, label, legend, kind, NULL, err);                                        \
    } while (0)
    COL(TF_C_POPULATION, NULL);
    COL(TF_C_STATUS, "done; failed or bad data (see reason); not done (run the batch again to finish)");
    COL(TF_C_FIRST_YEAR, NULL);
    COL(TF_C_LAST_YEAR, NULL);
    COL(TF_C_YEARS_SURVEYED, NULL);
    COL(TF_C_UNIT, NULL);
    COL(TF_C_ABUNDANCE, NULL);
    COL(TF_C_ABUNDANCE_LOWER_95, NULL);
    COL(TF_C_ABUNDANCE_UPPER_95, NULL);
    COL(TF_C_CHANGE, NULL);
    COL(TF_C_CHANGE_LOWER_95, NULL);
    COL(TF_C_CHANGE_UPPER_95, NULL);
    COL(TF_C_P_DECLINE, NULL);
    COL(TF_C_RECENT_FIRST_YEAR, NULL);
    COL(TF_C_RECENT_CHANGE, NULL);
    COL(TF_C_RECENT_CHANGE_LOWER_95, NULL);
    COL(TF_C_RECENT_CHANGE_UPPER_95, NULL);
    COL(TF_C_RECENT_P_DECLINE, NULL);
    COL(TF_C_BEST_GROWTH_MODEL, NULL);
    COL(TF_C_BEST_GROWTH_PROB, NULL);
    COL(TF_C_BEST_MODEL, NULL);
    COL(TF_C_BEST_MODEL_PROB, NULL);
    size_t nry = n_risk_years(p);
    for (size_t k = 0; k < p->n_thresholds; k++) {
        char name_[64], label[96], words[96], legend[256];
        /* Across populations: a threshold is in each population's own unit (its unit column). */
        tf_wording_threshold(&p->thresholds[k], "(in each row's unit)", words, sizeof words);
        snprintf(name_, sizeof name_, "threshold_%zu", k + 1);
        snprintf(label, sizeof label, "Threshold %zu", k + 1);
        snprintf(legend, sizeof legend, "quasi-extinction threshold %zu: %s (see threshold_%zu_kind)", k + 1, words,
                 k + 1);
        OTHER(name_, label, legend, TF_COL_NUMBER);
        snprintf(name_, sizeof name_, "threshold_%zu_kind", k + 1);
        snprintf(label, sizeof label, "Threshold %zu kind", k + 1);
        OTHER(name_, label, "animals: an abundance; fraction_of_current: a fraction of the current abundance",
              TF_COL_TEXT);
        for (size_t y = 0; y < nry; y++) {
            size_t yr = tf_analysis_risk_years[y];
            snprintf(name_, sizeof name_, "risk_%zu_%zuy", k + 1, yr);
            snprintf(label, sizeof label, "Below threshold %zu within %zu years", k + 1, yr);
            snprintf(legend, sizeof legend, "chance of falling below %s at any time within %zu years", words, yr);
            OTHER(name_, label, legend, TF_COL_PROBABILITY);
        }
    }
    size_t j = 0;
    for (size_t w = 0; w < n_windows(p); w++)
        for (size_t d = 0; d < p->n_declines; d++) {
            char name_[64], label[96], pct[32], legend[256];
            j++;
            tf_wording_percent(100 * p->declines[d], pct, sizeof pct);
            snprintf(name_, sizeof name_, "decline_%zu", j);
            snprintf(label, sizeof label, "Decline %zu", j);
            OTHER(name_, label, "size of the decline, a fraction of the current abundance", TF_COL_PERCENT);
            snprintf(name_, sizeof name_, "decline_%zu_window_years", j);
            snprintf(label, sizeof label, "Decline %zu window (years)", j);
            OTHER(name_, label, "years over which the decline is measured", TF_COL_INTEGER);
            snprintf(name_, sizeof name_, "decline_%zu_prob", j);
            snprintf(label, sizeof label, "Chance of decline %zu", j);
            snprintf(legend, sizeof legend, "chance of a decline of %s %% or more in year %zu", pct, window(p, w));
            OTHER(name_, label, legend, TF_COL_PROBABILITY);
        }
    COL(TF_C_CHECKS, "passed: every fit passed the R-hat and ESS checks");
    COL(TF_C_REASON, NULL);
#undef COL
#undef OTHER
    if (st != TF_OK) {
        tf_table_free(t);
        return NULL;
    }
    return t;
}

tf_status tf_populations_table_add(tf_table *t, const tf_project_options *p, const char *label, const tf_series *s,
                                   const tf_analysis_pop *pop, const char *status, const char *reason, tf_error *err)
{
    size_t nc = tf_table_n_columns(t), row;
    tf_status st = tf_table_add_row(t, &row, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, row, C_POP, label, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, row, C_STATUS, status, err);
    if (st == TF_OK && strcmp(status, TF_POPULATION_DONE))
        st = tf_table_set_warning(t, row, C_STATUS, err);
    if (st == TF_OK && reason && reason[0])
        st = tf_table_set_text(t, row, nc - 1, reason, err);
    if (st != TF_OK || !s)
        return st;
    size_t ny = tf_series_n_years(s);
    tf_table_set_number(t, row, C_FIRST, tf_series_first_year(s));
    tf_table_set_number(t, row, C_LAST, tf_series_first_year(s) + (double)ny - 1);
    tf_table_set_number(t, row, C_SURVEYED, (double)tf_series_n_surveyed(s));
    char unit[TF_TABLES_UNIT_SIZE];
    if ((st = tf_table_set_text(t, row, C_UNIT, tf_tables_unit(s, unit, sizeof unit), err)))
        return st;
    size_t c = C_RISK0, nry = n_risk_years(p);
    for (size_t k = 0; k < p->n_thresholds; k++, c += 2 + nry) {
        tf_table_set_number(t, row, c, p->thresholds[k].value);
        if ((st = tf_table_set_text(t, row, c + 1,
                                    p->thresholds[k].relative ? TF_THRESHOLD_FRACTION : TF_THRESHOLD_ANIMALS, err)))
            return st;
    }
    for (size_t w = 0; w < n_windows(p); w++)
        for (size_t d = 0; d < p->n_declines; d++, c += 3) {
            tf_table_set_number(t, row, c, p->declines[d]);
            tf_table_set_number(t, row, c + 1, (double)window(p, w));
        }
    if (!pop)
        return TF_OK;
    const tf_analysis_year *last = tf_analysis_pop_year(pop, ny - 1);
    const tf_analysis_trend *tr = tf_analysis_pop_trend(pop), *rt = tf_analysis_pop_trend_recent(pop);
    double v[] = {last->median, last->q025, last->q975, tr->median,    tr->q025,   tr->q975,
                  tr->p_decline, rt->first_year, rt->median, rt->q025, rt->q975, rt->p_decline};
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
    c = C_RISK0;
    for (size_t k = 0; k < p->n_thresholds; k++) {
        c += 2;
        for (size_t y = 0; y < nry; y++)
            tf_table_set_number(t, row, c++, tf_projection_risk(pr, k, tf_analysis_risk_years[y]));
    }
    for (size_t w = 0; w < n_windows(p); w++)
        for (size_t d = 0; d < p->n_declines; d++, c += 3)
            tf_table_set_number(t, row, c + 2, tf_projection_decline_prob(pr, w, d));
    int conv = tf_populations_all_converged(pop);
    st = tf_table_set_text(t, row, c, conv ? "passed" : "not all passed", err);
    if (st == TF_OK && !conv)
        st = tf_table_set_warning(t, row, c, err);
    return st;
}

tf_status tf_populations_csv_text(const tf_table *t, char **head, char **body, tf_error *err)
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

size_t tf_populations_split_line(const char *s, char **fields, size_t max)
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

tf_status tf_populations_table_add_line(tf_table *t, const char *text, tf_error *err)
{
    size_t nc = tf_table_n_columns(t), row;
    char **f = calloc(nc, sizeof *f);
    if (!f)
        return nomem(err);
    size_t n = tf_populations_split_line(text, f, nc);
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
    if (st == TF_OK && n > C_STATUS && strcmp(f[C_STATUS], TF_POPULATION_DONE))
        st = tf_table_set_warning(t, row, C_STATUS, err);
    if (st == TF_OK && n == nc && !strcmp(f[nc - 2], "not all passed"))
        st = tf_table_set_warning(t, row, nc - 2, err);
    for (size_t j = 0; j < n; j++)
        free(f[j]);
    free(f);
    return st;
}
