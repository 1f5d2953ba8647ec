/* The report: tables in sheet order with their CSV names and charts, written through the
 * workbook writer and atomic CSV files so that the set of outputs appears all at once. */
#include "export/report.h"

#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "export/atomic.h"
#include "export/csv_out.h"
#include "util/buf.h"

/* Room for a CSV file name: tf_csv_file_name shortens to its buffer, and a "-NNN" suffix. */
#define CSV_NAME_BUF 96

typedef struct {
    tf_table *table;
    char *about;
    char *population;            /* what the contents file says the table is about; NULL = the file */
    char folder[CSV_NAME_BUF];   /* "" = the CSV folder itself */
    char csv[CSV_NAME_BUF];
    int csv_only;
} entry;

typedef struct {
    tf_report_chart spec;   /* strings and series below are the report's own copies */
    tf_chart_series *series;
    char *title, *x_title, *y_title, *anchor;
    char **series_names;
} chart;

struct tf_report {
    entry *tables;
    size_t n_tables, cap_tables;
    chart *charts;
    size_t n_charts, cap_charts;
};

static tf_status nomem(tf_error *err)
{
    return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory while laying out the report");
}

static char *dup_opt(const char *s, int *failed)
{
    if (!s)
        return NULL;
    char *d = strdup(s);
    if (!d)
        *failed = 1;
    return d;
}

tf_report *tf_report_new(tf_error *err)
{
    tf_report *r = calloc(1, sizeof *r);
    if (!r)
        nomem(err);
    return r;
}

static void free_chart(chart *c)
{
    if (c->series_names)
        for (size_t k = 0; k < c->spec.n_series; k++)
            free(c->series_names[k]);
    free(c->series_names);
    free(c->series);
    free(c->title);
    free(c->x_title);
    free(c->y_title);
    free(c->anchor);
}

void tf_report_free(tf_report *r)
{
    if (!r)
        return;
    for (size_t i = 0; i < r->n_tables; i++) {
        tf_table_free(r->tables[i].table);
        free(r->tables[i].about);
        free(r->tables[i].population);
    }
    for (size_t i = 0; i < r->n_charts; i++)
        free_chart(&r->charts[i]);
    free(r->tables);
    free(r->charts);
    free(r);
}

/* Whether name in folder is taken by another table than skip, or by the contents file. */
static int csv_taken(const tf_report *r, const char *folder, const char *name, size_t skip)
{
    if (!folder[0] && !strcmp(name, TF_REPORT_CONTENTS_CSV))
        return 1;
    for (size_t i = 0; i < r->n_tables; i++)
        if (i != skip && !strcmp(r->tables[i].folder, folder) && !strcmp(r->tables[i].csv, name))
            return 1;
    return 0;
}

/* e->csv from stem, made unique within e's folder with "-2", "-3"... */
static void unique_csv(const tf_report *r, size_t index, const char *stem_name)
{
    entry *e = &r->tables[index];
    /* The base name leaves room for the suffix, so that "-2" never cuts into ".csv". */
    char base[CSV_NAME_BUF - 8];
    tf_csv_file_name(stem_name, base, sizeof base);
    snprintf(e->csv, sizeof e->csv, "%s", base);
    size_t stem = strlen(base) - 4;   /* without ".csv" */
    for (unsigned k = 2; csv_taken(r, e->folder, e->csv, index); k++)
        snprintf(e->csv, sizeof e->csv, "%.*s-%u.csv", (int)stem, base, k);
}

tf_status tf_report_add_table(tf_report *r, tf_table *t, const char *about, size_t *index, tf_error *err)
{
    if (!t)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "report: no table given");
    if (!tf_buf_grow((void **)&r->tables, &r->cap_tables, r->n_tables + 1, sizeof *r->tables, 8)) {
        tf_table_free(t);
        return nomem(err);
    }
    entry *e = &r->tables[r->n_tables];
    memset(e, 0, sizeof *e);
    int failed = 0;
    e->about = dup_opt(about, &failed);
    if (failed) {
        tf_table_free(t);
        return nomem(err);
    }
    e->table = t;
    unique_csv(r, r->n_tables, tf_table_name(t));
    if (index)
        *index = r->n_tables;
    r->n_tables++;
    return TF_OK;
}

tf_status tf_report_set_place(tf_report *r, size_t index, const char *population, const char *folder,
                              const char *stem, tf_error *err)
{
    if (index >= r->n_tables || !stem || !stem[0] || (folder && (strlen(folder) >= CSV_NAME_BUF || strchr(folder, '/') ||
                                                                !strcmp(folder, ".") || !strcmp(folder, ".."))))
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "report: bad CSV place for table %zu", index);
    entry *e = &r->tables[index];
    char *pop = population && population[0] ? strdup(population) : NULL;
    if (population && population[0] && !pop)
        return nomem(err);
    free(e->population);
    e->population = pop;
    snprintf(e->folder, sizeof e->folder, "%s", folder ? folder : "");
    unique_csv(r, index, stem);
    return TF_OK;
}

const char *tf_report_csv_folder(const tf_report *r, size_t index)
{
    return index < r->n_tables ? r->tables[index].folder : NULL;
}

size_t tf_report_n_tables(const tf_report *r) { return r->n_tables; }

void tf_report_set_csv_only(tf_report *r, size_t index)
{
    if (index < r->n_tables)
        r->tables[index].csv_only = 1;
}

int tf_report_csv_only(const tf_report *r, size_t index)
{
    return index < r->n_tables && r->tables[index].csv_only;
}

const tf_table *tf_report_table(const tf_report *r, size_t index)
{
    return index < r->n_tables ? r->tables[index].table : NULL;
}

const char *tf_report_about(const tf_report *r, size_t index)
{
    return index < r->n_tables && r->tables[index].about ? r->tables[index].about : "";
}

const char *tf_report_csv_name(const tf_report *r, size_t index)
{
    return index < r->n_tables ? r->tables[index].csv : NULL;
}

static tf_status bad_chart(tf_error *err, const char *what)
{
    return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "report chart: %s", what);
}

tf_status tf_report_add_chart(tf_report *r, const tf_report_chart *c, tf_error *err)
{
    if (c->data >= r->n_tables)
        return bad_chart(err, "the data table is not part of the report");
    if (c->place != TF_REPORT_SAME_SHEET && c->place >= r->n_tables)
        return bad_chart(err, "the sheet to draw on is not part of the report");
    const tf_table *t = r->tables[c->data].table;
    if (r->tables[c->data].csv_only || (c->place != TF_REPORT_SAME_SHEET && r->tables[c->place].csv_only))
        return bad_chart(err, "a table written as CSV only has no sheet");
    if (tf_table_is_summary(t))
        return bad_chart(err, "a summary table cannot hold chart data");
    if (!c->series || c->n_series == 0)
        return bad_chart(err, "no series to draw");
    size_t nc = tf_table_n_columns(t), nr = tf_table_n_rows(t);
    if (c->x_column >= nc)
        return bad_chart(err, "the x column is not a column of the table");
    for (size_t k = 0; k < c->n_series; k++) {
        if (c->series[k].column >= nc)
            return bad_chart(err, "a series column is not a column of the table");
    }
    if (c->first_row >= nr || (c->n_rows && c->n_rows > nr - c->first_row))
        return bad_chart(err, "no rows to draw, or rows beyond the end of the table");
    if (c->series_stride && (!c->n_rows || (nr - c->first_row - c->n_rows) / c->series_stride < c->n_series - 1))
        return bad_chart(err, "a series' block of rows lies beyond the end of the table");
    if (!tf_buf_grow((void **)&r->charts, &r->cap_charts, r->n_charts + 1, sizeof *r->charts, 8))
        return nomem(err);
    chart *ch = &r->charts[r->n_charts];
    memset(ch, 0, sizeof *ch);
    ch->spec = *c;
    int failed = 0;
    ch->title = dup_opt(c->title, &failed);
    ch->x_title = dup_opt(c->x_title, &failed);
    ch->y_title = dup_opt(c->y_title, &failed);
    ch->anchor = dup_opt(c->anchor, &failed);
    ch->series = malloc(c->n_series * sizeof *ch->series);
    ch->series_names = calloc(c->n_series, sizeof *ch->series_names);
    if (!ch->series || !ch->series_names)
        failed = 1;
    for (size_t k = 0; !failed && k < c->n_series; k++) {
        ch->series[k] = c->series[k];
        ch->series_names[k] = dup_opt(c->series[k].name, &failed);
        ch->series[k].name = ch->series_names[k];
    }
    if (failed) {
        free_chart(ch);
        return nomem(err);
    }
    ch->spec.title = ch->title;
    ch->spec.x_title = ch->x_title;
    ch->spec.y_title = ch->y_title;
    ch->spec.anchor = ch->anchor;
    ch->spec.series = ch->series;
    r->n_charts++;
    return TF_OK;
}

/* dir + "/" + name into buf; 0 when it does not fit. */
static int join_path(char *buf, size_t size, const char *dir, const char *name)
{
    int n = snprintf(buf, size, "%s/%s", dir, name);
    return n >= 0 && (size_t)n < size;
}

static int stopped(const volatile sig_atomic_t *stop)
{
    return stop && *stop;
}

static tf_status interrupted(tf_error *err)
{
    return tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "stopped before the results were written");
}

/* The contents table: one row per table. names holds the sheets' final names. */
static tf_table *contents_table(const tf_report *r, char (*names)[TF_SHEET_NAME_BUF], tf_error *err)
{
    tf_table *t = tf_table_new("contents", err);
    if (!t)
        return NULL;
    size_t c_pop, c_file, c_sheet, c_about;
    if (tf_table_add_column(t, "population", "the population the table is about (blank: the whole file)", TF_COL_TEXT,
                            &c_pop, err) != TF_OK ||
        tf_table_add_column(t, "file", "the CSV file, relative to this folder", TF_COL_TEXT, &c_file, err) != TF_OK ||
        tf_table_add_column(t, "sheet", "the sheet of the workbook showing the same table (blank: CSV only)",
                            TF_COL_TEXT, &c_sheet, err) != TF_OK ||
        tf_table_add_column(t, "about", "what the table holds", TF_COL_TEXT, &c_about, err) != TF_OK)
        goto fail;
    for (size_t i = 0; i < r->n_tables; i++) {
        const entry *e = &r->tables[i];
        size_t row;
        char file[2 * CSV_NAME_BUF];
        snprintf(file, sizeof file, "%s%s%s", e->folder, e->folder[0] ? "/" : "", e->csv);
        if (tf_table_add_row(t, &row, err) != TF_OK || tf_table_set_text(t, row, c_pop, e->population, err) != TF_OK ||
            tf_table_set_text(t, row, c_file, file, err) != TF_OK ||
            tf_table_set_text(t, row, c_sheet, names[i], err) != TF_OK ||
            tf_table_set_text(t, row, c_about, e->about, err) != TF_OK)
            goto fail;
    }
    return t;
fail:
    tf_table_free(t);
    return NULL;
}

/* Opens dir/name and writes t into the temporary; on success *out holds the uncommitted file. */
static tf_status csv_to_temp(const tf_table *t, const char *dir, const char *name, const char *protect, tf_atomic **out,
                             tf_error *err)
{
    char path[PATH_MAX];
    *out = NULL;
    if (!join_path(path, sizeof path, dir, name))
        return tf_error_add(err, TF_ERR_IO, dir, 0, 0, "use a shorter output folder", "output path too long");
    tf_atomic *a;
    tf_status st = tf_atomic_open(path, protect, &a, err);
    if (st != TF_OK)
        return st;
    st = tf_csv_write_stream(t, tf_atomic_stream(a), path, err);
    if (st == TF_OK)
        st = tf_atomic_close_stream(a, err);
    if (st != TF_OK) {
        tf_atomic_abort(a);
        return st;
    }
    *out = a;
    return TF_OK;
}

tf_status tf_report_write(const tf_report *r, const char *xlsx_path, const char *csv_dir, const char *protect,
                          const volatile sig_atomic_t *stop, tf_error *err)
{
    tf_status st = TF_OK;
    size_t n_made = 0;   /* folders made for the CSV files, taken away again on failure */
    size_t n_files = r->n_tables + 1;   /* the tables and the contents file */
    tf_atomic **files = calloc(n_files, sizeof *files);
    size_t *sub_made = calloc(n_files, sizeof *sub_made);   /* per table: folders its folder needed */
    tf_sheet **sheets = calloc(r->n_tables ? r->n_tables : 1, sizeof *sheets);
    char(*names)[TF_SHEET_NAME_BUF] = calloc(r->n_tables ? r->n_tables : 1, sizeof *names);
    tf_workbook *wb = NULL;
    tf_table *contents = NULL;
    if (!files || !sub_made || !sheets || !names) {
        st = nomem(err);
        goto done;
    }
    /* Refuse the protected input before any folder is made. */
    if ((st = tf_atomic_check_target(xlsx_path, protect, err)) != TF_OK)
        goto done;
    if (csv_dir && (st = tf_atomic_mkdirs(csv_dir, &n_made, err)) != TF_OK)
        goto done;
    if (!(wb = tf_workbook_new(xlsx_path, protect, err))) {
        st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_IO;
        goto done;
    }
    for (size_t i = 0; i < r->n_tables; i++) {
        if (stopped(stop)) {
            st = interrupted(err);
            goto done;
        }
        if (!r->tables[i].csv_only) {
            if ((st = tf_workbook_add_table(wb, r->tables[i].table, &sheets[i], err)) != TF_OK)
                goto done;
            snprintf(names[i], sizeof names[i], "%s", tf_sheet_name(sheets[i]));
        }
        if (!csv_dir)
            continue;
        const entry *e = &r->tables[i];
        char dir[PATH_MAX];
        if (!join_path(dir, sizeof dir, csv_dir, e->folder)) {
            st = tf_error_add(err, TF_ERR_IO, csv_dir, 0, 0, "use a shorter output folder", "output path too long");
            goto done;
        }
        /* A population's folder is made with its first table and taken away on failure. */
        if (e->folder[0] && (st = tf_atomic_mkdirs(dir, &sub_made[i], err)) != TF_OK)
            goto done;
        if ((st = csv_to_temp(e->table, dir, e->csv, protect, &files[i], err)) != TF_OK)
            goto done;
    }
    for (size_t i = 0; i < r->n_charts; i++) {
        const tf_report_chart *c = &r->charts[i].spec;
        tf_chart_spec spec = {
            .kind = c->kind,
            .title = c->title,
            .x_title = c->x_title,
            .y_title = c->y_title,
            .data = sheets[c->data],
            .x_column = c->x_column,
            .series = c->series,
            .n_series = c->n_series,
            .first_row = c->first_row,
            .n_rows = c->n_rows,
            .series_stride = c->series_stride,
            .place = c->place == TF_REPORT_SAME_SHEET ? NULL : sheets[c->place],
            .anchor = c->anchor,
        };
        if ((st = tf_workbook_add_chart(wb, &spec, err)) != TF_OK)
            goto done;
    }
    if (csv_dir && !(contents = contents_table(r, names, err))) {
        st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
        goto done;
    }
    if (csv_dir &&
        (st = csv_to_temp(contents, csv_dir, TF_REPORT_CONTENTS_CSV, protect, &files[r->n_tables], err)) != TF_OK)
        goto done;
    if (stopped(stop)) {
        st = interrupted(err);
        goto done;
    }
    /* The workbook first: it is the file people open, and its rename is the point after which
     * the new results count as written. */
    st = tf_workbook_close(wb, err);
    wb = NULL;
    if (st != TF_OK)
        goto done;
    n_made = 0;   /* the workbook is in place: the folders stay whatever happens next */
    memset(sub_made, 0, n_files * sizeof *sub_made);
    st = csv_dir ? tf_atomic_commit_all(files, n_files, err) : TF_OK;
    for (size_t i = 0; i < n_files; i++)
        files[i] = NULL;
done:
    tf_workbook_free(wb);
    if (files)
        for (size_t i = 0; i < n_files; i++)
            tf_atomic_abort(files[i]);
    for (size_t i = r->n_tables; st != TF_OK && sub_made && i-- > 0;)
        if (sub_made[i]) {
            char dir[PATH_MAX];
            if (join_path(dir, sizeof dir, csv_dir, r->tables[i].folder))
                tf_atomic_rmdirs(dir, sub_made[i]);
        }
    if (st != TF_OK && n_made)
        tf_atomic_rmdirs(csv_dir, n_made);
    free(sub_made);
    tf_table_free(contents);
    free(files);
    free(sheets);
    free(names);
    return st;
}
