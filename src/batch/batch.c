/* The batch: per-population folders with a completed marker, resuming a run whose settings
 * record matches, the thread runner and the combined outputs; see batch.h. The records' own
 * formats (the settings record, the summary rows) are in records.c. */
#include "batch/batch.h"
#include "batch/records.h"

#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <pthread.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "analysis/provenance.h"
#include "export/atomic.h"
#include "export/csv_out.h"
#include "export/report.h"
#include "export/table.h"
#include "export/workbook.h"
#include "model/model.h"
#include "project/cautions.h"
#include "tables/analysis_tables.h"
#include "tables/batch_page.h"
#include "tables/columns.h"
#include "tables/contents_table.h"
#include "tables/populations_table.h"
#include "util/path.h"
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

/* ---- folder names ---- */

/* The label as one folder name that every file system takes: ASCII letters, digits, '-' and '_'
 * kept, '.' kept except first, everything else '_'; "population" for an empty label. */
/* Folder names: the one rule of every command (tf_path_folder_names), in the batch's folder. */
static tf_status name_folders(tf_batch *b, tf_error *err)
{
    const char **labels = calloc(b->n ? b->n : 1, sizeof *labels);
    char **names = calloc(b->n ? b->n : 1, sizeof *names);
    tf_status st = labels && names ? TF_OK : nomem(err);
    for (size_t i = 0; st == TF_OK && i < b->n; i++)
        labels[i] = b->items[i].label;
    if (st == TF_OK && !tf_path_folder_names(labels, b->n, names))
        st = nomem(err);
    for (size_t i = 0; i < b->n && st == TF_OK; i++) {
        char path[PATH_BUF];
        if ((st = join(path, sizeof path, b->o.root, names[i], err)) == TF_OK && !(b->items[i].folder = strdup(path)))
            st = nomem(err);
    }
    for (size_t i = 0; names && i < b->n; i++)
        free(names[i]);
    free(names);
    free(labels);
    return st;
}

/* The CSV header of the table of populations under the batch's projection settings. */
static tf_status populations_header(const tf_batch *b, char **out, tf_error *err)
{
    *out = NULL;
    tf_table *t = tf_populations_table_new(&b->o.analysis.project, TF_POPULATIONS_TABLE_NAME, err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    char *body = NULL;
    tf_status st = tf_populations_csv_text(t, out, &body, err);
    free(body);
    tf_table_free(t);
    return st;
}

/* The one-row table of populations of one population, and its row as CSV text in *line
 * (malloc'd): the form the batch keeps, hands between processes and combines. */
static tf_status population_row(const tf_batch *b, const char *label, const tf_series *s, const tf_analysis_pop *pop,
                                tf_batch_state state, const char *reason, tf_table **table, char **line, tf_error *err)
{
    *line = NULL;
    if (table)
        *table = NULL;
    tf_table *t = tf_populations_table_new(&b->o.analysis.project, TF_POPULATIONS_TABLE_NAME, err);
    if (!t)
        return tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
    char *head = NULL;
    tf_status st = tf_populations_table_add(t, &b->o.analysis.project, label, s, pop, tf_batch_state_name(state), reason,
                                            err);
    if (st == TF_OK)
        st = tf_populations_csv_text(t, &head, line, err);
    free(head);
    if (st == TF_OK && table)
        *table = t;
    else
        tf_table_free(t);
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
    const tf_analysis_options *a = &b->o.analysis;
    if ((st = tf_records_settings(a, b->sha256, b->workbooks, b->o.workbook_draws, b->o.extra_settings, &b->settings, err)) != TF_OK)
        goto fail;
    tf_provenance_hash_bytes(b->settings, strlen(b->settings), b->settings_hash);
    if ((st = name_folders(b, err)) != TF_OK || (st = populations_header(b, &b->header, err)) != TF_OK)
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
        size_t n = ok ? tf_populations_split_line(line, f, 2) : 0;
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
            tf_table *t = tf_populations_table_new(&b->o.analysis.project, TF_POPULATIONS_TABLE_NAME, NULL);
            if (t && tf_populations_table_add_line(t, line, NULL) == TF_OK && tf_table_n_rows(t) == 1) {
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
            char *f[2] = {0};
            /* The file is the second field. Only plain file names: a contents file cannot send
             * this anywhere else. */
            size_t nf = tf_populations_split_line(p, f, 2);
            if (nf == 2 && !strchr(f[1], '/') && strcmp(f[1], "..") && strcmp(f[1], ".") &&
                join(path, sizeof path, dir, f[1], NULL) == TF_OK)
                unlink(path);
            for (size_t k = 0; k < nf; k++)
                free(f[k]);
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
    char sub[PATH_BUF], probe[PATH_BUF];
    const char *dir = b->o.root;
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
    if ((st = write_text(path, b->settings, b->o.survey_path, err)) != TF_OK)
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

/* The population's tables as CSV files, each with its population column (the report's tables, or
 * only its row of the table of populations when it was not analysed), and its contents file,
 * written together, all or none. */
static tf_status write_tables(const tf_batch *b, const item *it, const tf_report *r, const tf_table *row,
                              tf_error *err)
{
    size_t nt = r ? tf_report_n_tables(r) : 0, n = 0;
    const tf_table **tables = calloc(nt + 2, sizeof *tables);
    tf_table *contents = tf_contents_table_new(err);
    tf_status st = tables && contents ? TF_OK : nomem(err);
    for (size_t k = 0; k < nt + 1 && st == TF_OK; k++) {
        const tf_table *t = k < nt ? tf_report_table(r, k) : (r ? NULL : row);
        if (!t)
            continue;
        char file[128];
        tf_csv_file_name(tf_table_name(t), file, sizeof file);
        st = tf_contents_table_add(contents, it->label, file,
                                   k < nt && b->workbooks && !tf_report_csv_only(r, k) ? tf_table_name(t) : NULL,
                                   k < nt ? tf_report_about(r, k) : "the population's row of the table of populations",
                                   err);
        tables[n++] = t;
    }
    if (st == TF_OK) {
        tables[n++] = contents;
        st = tf_csv_write_all(tables, n, it->folder, b->o.survey_path, err);
    }
    free(tables);
    tf_table_free(contents);
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
    tf_table *row = NULL;
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
            tf_analysis_tables_provenance prov = {.input_name = b->o.survey_path, .title = b->o.title, .omit_seconds = 1,
                                         .workbook_draws = b->o.workbook_draws,
                                         .csv_place = "the same folder as this workbook"};
            memcpy(prov.sha256, b->sha256, sizeof prov.sha256);
            memcpy(prov.date, b->date, sizeof prov.date);
            if (!(r = tf_report_new(err)) || (st = tf_analysis_tables_build(a, &prov, r, err)) != TF_OK)
                goto fail;
        }
    }
    const tf_analysis_pop *pop = a ? tf_analysis_population(a, 0) : NULL;
    if ((st = population_row(b, it->label, it->s, pop, res->state, res->reason, &row, &res->row, err)) != TF_OK)
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
    if ((st = write_tables(b, it, r, row, err)) != TF_OK)
        goto fail;
    if (stop && *stop) {
        st = tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
        goto fail;
    }
    res->seconds = seconds_since(&t0);
    if ((st = write_marker(b, it, res->state, res->seconds, err)) != TF_OK)
        goto fail;
    tf_table_free(row);
    tf_report_free(r);
    tf_analysis_free(a);
    return TF_OK;
fail:
    tf_batch_result_clear(res);
    tf_table_free(row);
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

/* The batch's first page (tables/batch_page.h). */
static tf_status about_table(const tf_batch *b, tf_table **out, tf_error *err)
{
    static const tf_batch_state states[4] = {TF_BATCH_DONE, TF_BATCH_FAILED, TF_BATCH_BAD_DATA, TF_BATCH_PENDING};
    tf_batch_page p = {.title = b->o.title, .survey_path = b->o.survey_path, .sha256 = b->sha256, .date = b->date,
                       .settings_file = TF_BATCH_SETTINGS, .n_populations = b->n, .workbooks = b->workbooks,
                       .workbook_draws = b->o.workbook_draws};
    for (size_t k = 0; k < 4; k++) {
        p.n_state[k] = tf_batch_count(b, states[k]);
        p.state_word[k] = tf_batch_state_name(states[k]);
    }
    return tf_batch_page_build(&p, out, err);
}

tf_status tf_batch_write_summary(const tf_batch *b, const volatile sig_atomic_t *stop, tf_error *err)
{
    char path[PATH_BUF];
    tf_table *rows = NULL, *about = NULL, *times = NULL;
    tf_workbook *wb = NULL;
    tf_status st = TF_OK;
    if (!(rows = tf_populations_table_new(&b->o.analysis.project, "Populations", err)) ||
        !(times = tf_batch_timings_new(err))) {
        st = tf_error_status(err) != TF_OK ? tf_error_status(err) : TF_ERR_NOMEM;
        goto done;
    }
    tf_table_set_filter(rows, 1);
    /* Each population's row is kept as the CSV line its folder holds (the form that comes back
     * from an earlier run or another process); read back, it is written again to the same bytes,
     * so that the rows of the folders concatenate into the combined table. */
    for (size_t i = 0; i < b->n && st == TF_OK; i++) {
        const item *it = &b->items[i];
        char *pending = NULL;
        const char *line = it->row;
        if (!line) {
            if ((st = population_row(b, it->label, it->s, NULL, TF_BATCH_PENDING, NULL, NULL, &pending, err)) !=
                TF_OK)
                break;
            line = pending;
        }
        st = tf_populations_table_add_line(rows, line, err);
        if (st == TF_OK)
            st = tf_batch_timings_add(times, it->label, tf_batch_state_name(it->state),
                                      it->state == TF_BATCH_PENDING ? NAN : it->seconds, err);
        free(pending);
    }
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
    /* The first page first, with its cautions, as the single report has it. */
    if ((st = tf_workbook_add_table(wb, about, NULL, err)) != TF_OK ||
        (st = tf_workbook_add_table(wb, rows, NULL, err)) != TF_OK) {
        goto done;
    }
    st = tf_workbook_close(wb, err);
    wb = NULL;
    if (st != TF_OK)
        goto done;
    const struct {
        const char *file;
        const tf_table *t;
    } files[] = {{TF_BATCH_SUMMARY_CSV, rows}, {TF_BATCH_FIRST_PAGE_CSV, about}, {TF_BATCH_TIMINGS_CSV, times}};
    for (size_t k = 0; k < sizeof files / sizeof files[0] && st == TF_OK; k++)
        if ((st = join(path, sizeof path, b->o.root, files[k].file, err)) == TF_OK)
            st = tf_csv_write(files[k].t, path, b->o.survey_path, err);
done:
    tf_workbook_free(wb);
    tf_table_free(rows);
    tf_table_free(about);
    tf_table_free(times);
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
