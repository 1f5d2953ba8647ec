/* The export table: column-wise arrays of doubles, with text cells, per-cell kinds and warning
 * flags kept in side arrays that exist only once a column uses them. Cell text lives in one
 * growing arena, so no cell ever costs a malloc of its own. */
#include "export/table.h"

#include <assert.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "util/buf.h"

#define NO_TEXT SIZE_MAX
#define COLUMN_KIND 0xFF   /* cell_kind entry meaning "use the column's kind" */
#define FIRST_ROW_CAP 16
#define FIRST_ARENA_CAP 256

typedef struct {
    char *header;
    char *label;               /* the heading readers see; NULL = the header itself */
    char *legend;
    tf_col_kind kind;
    double *num;               /* cap_rows entries; NAN = no number */
    size_t *text;              /* NULL until the column gets text; arena offsets or NO_TEXT */
    unsigned char *cell_kind;  /* NULL until a cell gets its own kind; COLUMN_KIND = none */
    unsigned char *warn;       /* NULL until a cell is flagged */
} column;

typedef struct {
    char *text;
    tf_note_kind kind;
} note;

struct tf_table {
    char *name;
    char *population;          /* summary tables: the population of the rows added next */
    bool summary;
    bool filter;
    column *cols;
    size_t n_cols, cap_cols;
    size_t n_rows, cap_rows;
    char *arena;
    size_t arena_len, arena_cap;
    note *notes;
    size_t n_notes, cap_notes;
};

static const char *const kind_names[] = {"number", "integer", "percent", "probability", "text", "year"};
_Static_assert(sizeof kind_names / sizeof kind_names[0] == TF_COL_KIND_COUNT,
               "kind_names and tf_col_kind must have the same length");

const char *tf_col_kind_name(tf_col_kind kind)
{
    return ((int)kind >= 0 && kind < TF_COL_KIND_COUNT) ? kind_names[kind] : "unknown";
}

tf_table *tf_table_new(const char *name, tf_error *err)
{
    if (!name || !name[0]) {
        tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "a table needs a non-empty name");
        return NULL;
    }
    tf_table *t = calloc(1, sizeof *t);
    if (!t)
        goto fail;
    t->name = strdup(name);
    if (!t->name)
        goto fail;
    return t;
fail:
    tf_table_free(t);
    tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory creating table '%s'", name);
    return NULL;
}

void tf_table_free(tf_table *t)
{
    if (!t)
        return;
    for (size_t j = 0; j < t->n_cols; j++) {
        column *c = &t->cols[j];
        free(c->header);
        free(c->label);
        free(c->legend);
        free(c->num);
        free(c->text);
        free(c->cell_kind);
        free(c->warn);
    }
    for (size_t i = 0; i < t->n_notes; i++)
        free(t->notes[i].text);
    free(t->cols);
    free(t->notes);
    free(t->arena);
    free(t->population);
    free(t->name);
    free(t);
}

tf_status tf_table_add_column(tf_table *t, const char *header, const char *legend, tf_col_kind kind,
                              size_t *col, tf_error *err)
{
    if (!header || !header[0])
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': a column needs a header", t->name);
    if ((int)kind < 0 || kind >= TF_COL_KIND_COUNT)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': column '%s' has an unknown kind",
                            t->name, header);
    if (t->n_rows > 0)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL,
                            "table '%s': column '%s' added after the first row", t->name, header);
    if (!tf_buf_grow((void **)&t->cols, &t->cap_cols, t->n_cols + 1, sizeof *t->cols, 8))
        goto nomem;
    column c = {.kind = kind};
    c.header = strdup(header);
    c.legend = strdup(legend ? legend : "");
    if (!c.header || !c.legend) {
        free(c.header);
        free(c.legend);
        goto nomem;
    }
    t->cols[t->n_cols] = c;
    if (col)
        *col = t->n_cols;
    t->n_cols++;
    return TF_OK;
nomem:
    return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory adding a column to table '%s'", t->name);
}

tf_status tf_table_set_label(tf_table *t, size_t col, const char *label, tf_error *err)
{
    assert(col < t->n_cols);
    char *copy = label && label[0] ? strdup(label) : NULL;
    if (label && label[0] && !copy)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory labelling table '%s'", t->name);
    free(t->cols[col].label);
    t->cols[col].label = copy;
    return TF_OK;
}

const char *tf_table_label(const tf_table *t, size_t col)
{
    assert(col < t->n_cols);
    return t->cols[col].label ? t->cols[col].label : t->cols[col].header;
}

/* Makes room for one more row in every array of every column. On failure nothing that was
 * there is lost: arrays already enlarged simply stay larger than cap_rows. */
static int reserve_row(tf_table *t)
{
    if (t->n_rows < t->cap_rows)
        return 1;
    size_t cap = t->cap_rows ? t->cap_rows : FIRST_ROW_CAP / 2;
    assert(cap <= SIZE_MAX / 2 / sizeof(double));
    cap *= 2;
    for (size_t j = 0; j < t->n_cols; j++) {
        column *c = &t->cols[j];
        double *num = realloc(c->num, cap * sizeof *num);
        if (!num)
            return 0;
        c->num = num;
        if (c->text) {
            size_t *text = realloc(c->text, cap * sizeof *text);
            if (!text)
                return 0;
            c->text = text;
        }
        if (c->cell_kind) {
            unsigned char *k = realloc(c->cell_kind, cap);
            if (!k)
                return 0;
            c->cell_kind = k;
        }
        if (c->warn) {
            unsigned char *w = realloc(c->warn, cap);
            if (!w)
                return 0;
            c->warn = w;
        }
    }
    t->cap_rows = cap;
    return 1;
}

tf_status tf_table_add_row(tf_table *t, size_t *row, tf_error *err)
{
    if (t->n_cols == 0)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': a row added before any column",
                            t->name);
    if (!reserve_row(t))
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory adding a row to table '%s'", t->name);
    size_t i = t->n_rows++;
    for (size_t j = 0; j < t->n_cols; j++) {
        column *c = &t->cols[j];
        c->num[i] = NAN;
        if (c->text)
            c->text[i] = NO_TEXT;
        if (c->cell_kind)
            c->cell_kind[i] = COLUMN_KIND;
        if (c->warn)
            c->warn[i] = 0;
    }
    if (row)
        *row = i;
    return TF_OK;
}

tf_status tf_table_add_row_numbers(tf_table *t, const double *values, size_t n, tf_error *err)
{
    if (n > t->n_cols)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': a row of %zu values for %zu columns",
                            t->name, n, t->n_cols);
    size_t r;
    tf_status st = tf_table_add_row(t, &r, err);
    if (st != TF_OK)
        return st;
    for (size_t j = 0; j < n; j++)
        t->cols[j].num[r] = values[j];
    return TF_OK;
}

void tf_table_set_number(tf_table *t, size_t row, size_t col, double value)
{
    assert(row < t->n_rows && col < t->n_cols);
    column *c = &t->cols[col];
    c->num[row] = value;
    if (c->text)
        c->text[row] = NO_TEXT;
}

/* Allocates a side array of cap_rows entries of size elem, each set to fill. */
static void *side_array(const tf_table *t, size_t elem, const void *fill)
{
    void *a = malloc(t->cap_rows * elem);
    if (a)
        for (size_t i = 0; i < t->cap_rows; i++)
            memcpy((char *)a + i * elem, fill, elem);
    return a;
}

tf_status tf_table_set_text(tf_table *t, size_t row, size_t col, const char *text, tf_error *err)
{
    assert(row < t->n_rows && col < t->n_cols);
    column *c = &t->cols[col];
    if (!text || !text[0]) {
        if (c->text)
            c->text[row] = NO_TEXT;
        c->num[row] = NAN;
        return TF_OK;
    }
    if (!c->text) {
        size_t none = NO_TEXT;
        c->text = side_array(t, sizeof *c->text, &none);
        if (!c->text)
            goto nomem;
    }
    size_t n = strlen(text) + 1;
    assert(t->arena_len <= SIZE_MAX - n);
    if (!tf_buf_grow((void **)&t->arena, &t->arena_cap, t->arena_len + n, 1, FIRST_ARENA_CAP))
        goto nomem;
    memcpy(t->arena + t->arena_len, text, n);
    c->text[row] = t->arena_len;
    t->arena_len += n;
    c->num[row] = NAN;
    return TF_OK;
nomem:
    return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory storing text in table '%s'", t->name);
}

tf_status tf_table_set_cell_kind(tf_table *t, size_t row, size_t col, tf_col_kind kind, tf_error *err)
{
    assert(row < t->n_rows && col < t->n_cols);
    if ((int)kind < 0 || kind >= TF_COL_KIND_COUNT)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': unknown cell kind", t->name);
    column *c = &t->cols[col];
    if (!c->cell_kind) {
        unsigned char none = COLUMN_KIND;
        c->cell_kind = side_array(t, 1, &none);
        if (!c->cell_kind)
            return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory in table '%s'", t->name);
    }
    c->cell_kind[row] = (unsigned char)kind;
    return TF_OK;
}

tf_status tf_table_set_warning(tf_table *t, size_t row, size_t col, tf_error *err)
{
    assert(row < t->n_rows && (col < t->n_cols || col == TF_TABLE_WHOLE_ROW));
    size_t first = col == TF_TABLE_WHOLE_ROW ? 0 : col;
    size_t last = col == TF_TABLE_WHOLE_ROW ? t->n_cols : col + 1;
    for (size_t j = first; j < last; j++) {
        column *c = &t->cols[j];
        if (!c->warn) {
            unsigned char zero = 0;
            c->warn = side_array(t, 1, &zero);
            if (!c->warn)
                return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory in table '%s'", t->name);
        }
        c->warn[row] = 1;
    }
    return TF_OK;
}

tf_status tf_table_add_note(tf_table *t, tf_note_kind kind, const char *text, tf_error *err)
{
    if (!text || !text[0])
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': empty note", t->name);
    if (!tf_buf_grow((void **)&t->notes, &t->cap_notes, t->n_notes + 1, sizeof *t->notes, 4))
        goto nomem;
    char *d = strdup(text);
    if (!d)
        goto nomem;
    t->notes[t->n_notes++] = (note){d, kind == TF_NOTE_CAUTION ? TF_NOTE_CAUTION : TF_NOTE_INFO};
    return TF_OK;
nomem:
    return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory adding a note to table '%s'", t->name);
}

tf_status tf_table_add_notef(tf_table *t, tf_note_kind kind, tf_error *err, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    if (n < 0)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': bad note format", t->name);
    char *buf = malloc((size_t)n + 1);
    if (!buf)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory adding a note to table '%s'", t->name);
    va_start(ap, fmt);
    vsnprintf(buf, (size_t)n + 1, fmt, ap);
    va_end(ap);
    tf_status st = tf_table_add_note(t, kind, buf, err);
    free(buf);
    return st;
}

const char *tf_table_name(const tf_table *t)
{
    return t->name;
}

tf_status tf_table_set_name(tf_table *t, const char *name, tf_error *err)
{
    if (!name || !name[0])
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "a table needs a non-empty name");
    char *d = strdup(name);
    if (!d)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory naming table '%s'", name);
    free(t->name);
    t->name = d;
    return TF_OK;
}

size_t tf_table_n_columns(const tf_table *t)
{
    return t->n_cols;
}

size_t tf_table_n_rows(const tf_table *t)
{
    return t->n_rows;
}

const char *tf_table_header(const tf_table *t, size_t col)
{
    assert(col < t->n_cols);
    return t->cols[col].header;
}

const char *tf_table_legend(const tf_table *t, size_t col)
{
    assert(col < t->n_cols);
    return t->cols[col].legend;
}

tf_col_kind tf_table_column_kind(const tf_table *t, size_t col)
{
    assert(col < t->n_cols);
    return t->cols[col].kind;
}

size_t tf_table_find_column(const tf_table *t, const char *header)
{
    for (size_t j = 0; j < t->n_cols; j++)
        if (!strcmp(t->cols[j].header, header))
            return j;
    return TF_TABLE_NO_COLUMN;
}

const char *tf_table_text(const tf_table *t, size_t row, size_t col)
{
    assert(row < t->n_rows && col < t->n_cols);
    const column *c = &t->cols[col];
    return (c->text && c->text[row] != NO_TEXT) ? t->arena + c->text[row] : NULL;
}

double tf_table_number(const tf_table *t, size_t row, size_t col)
{
    assert(row < t->n_rows && col < t->n_cols);
    return t->cols[col].num[row];
}

bool tf_table_is_empty(const tf_table *t, size_t row, size_t col)
{
    return !tf_table_text(t, row, col) && isnan(tf_table_number(t, row, col));
}

tf_col_kind tf_table_cell_kind(const tf_table *t, size_t row, size_t col)
{
    assert(row < t->n_rows && col < t->n_cols);
    const column *c = &t->cols[col];
    return (c->cell_kind && c->cell_kind[row] != COLUMN_KIND) ? (tf_col_kind)c->cell_kind[row] : c->kind;
}

bool tf_table_warning(const tf_table *t, size_t row, size_t col)
{
    assert(row < t->n_rows && col < t->n_cols);
    const column *c = &t->cols[col];
    return c->warn && c->warn[row];
}

size_t tf_table_n_notes(const tf_table *t)
{
    return t->n_notes;
}

const char *tf_table_note(const tf_table *t, size_t i)
{
    assert(i < t->n_notes);
    return t->notes[i].text;
}

tf_note_kind tf_table_note_kind(const tf_table *t, size_t i)
{
    assert(i < t->n_notes);
    return t->notes[i].kind;
}

/* ---- Summary tables ---- */

enum { POPULATION_COL, ITEM_COL, VALUE_COL, NOTE_COL };

tf_table *tf_table_new_summary(const char *name, tf_error *err)
{
    tf_table *t = tf_table_new(name, err);
    if (!t)
        return NULL;
    if (tf_table_add_column(t, "population", "the population the row is about (empty: the whole file)", TF_COL_TEXT,
                            NULL, err) != TF_OK ||
        tf_table_add_column(t, "item", "what is reported", TF_COL_TEXT, NULL, err) != TF_OK ||
        tf_table_add_column(t, "value", "the result", TF_COL_NUMBER, NULL, err) != TF_OK ||
        tf_table_add_column(t, "note", "how to read it", TF_COL_TEXT, NULL, err) != TF_OK ||
        tf_table_set_label(t, POPULATION_COL, "Population", err) != TF_OK ||
        tf_table_set_label(t, ITEM_COL, "Item", err) != TF_OK || tf_table_set_label(t, VALUE_COL, "Value", err) != TF_OK ||
        tf_table_set_label(t, NOTE_COL, "Note", err) != TF_OK) {
        tf_table_free(t);
        return NULL;
    }
    t->summary = true;
    return t;
}

tf_status tf_table_set_summary_population(tf_table *t, const char *label, tf_error *err)
{
    char *copy = label && label[0] ? strdup(label) : NULL;
    if (label && label[0] && !copy)
        return tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory in table '%s'", t->name);
    free(t->population);
    t->population = copy;
    return TF_OK;
}

void tf_table_set_filter(tf_table *t, bool on) { t->filter = on; }
bool tf_table_filter(const tf_table *t) { return t->filter; }

bool tf_table_is_summary(const tf_table *t)
{
    return t->summary;
}

/* Adds a row with label and note; the caller fills the value. Undoes the row on failure. */
static tf_status add_item_row(tf_table *t, const char *label, const char *note_text, size_t *row, tf_error *err)
{
    if (!t->summary)
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s' is not a summary table", t->name);
    if (!label || !label[0])
        return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "table '%s': a summary item needs a label", t->name);
    tf_status st = tf_table_add_row(t, row, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, *row, POPULATION_COL, t->population, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, *row, ITEM_COL, label, err);
    if (st == TF_OK)
        st = tf_table_set_text(t, *row, NOTE_COL, note_text, err);
    if (st != TF_OK && t->n_rows > 0 && *row == t->n_rows - 1)
        t->n_rows--;
    return st;
}

tf_status tf_table_add_item_number(tf_table *t, const char *label, double value, tf_col_kind kind,
                                   const char *note_text, tf_error *err)
{
    size_t r = SIZE_MAX;
    tf_status st = add_item_row(t, label, note_text, &r, err);
    if (st != TF_OK)
        return st;
    tf_table_set_number(t, r, VALUE_COL, value);
    st = tf_table_set_cell_kind(t, r, VALUE_COL, kind, err);
    if (st != TF_OK)
        t->n_rows--;
    return st;
}

tf_status tf_table_add_item_text(tf_table *t, const char *label, const char *text, const char *note_text,
                                 tf_error *err)
{
    size_t r = SIZE_MAX;
    tf_status st = add_item_row(t, label, note_text, &r, err);
    if (st != TF_OK)
        return st;
    st = tf_table_set_text(t, r, VALUE_COL, text, err);
    if (st == TF_OK)
        st = tf_table_set_cell_kind(t, r, VALUE_COL, TF_COL_TEXT, err);
    if (st != TF_OK)
        t->n_rows--;
    return st;
}

bool tf_table_is_heading(const tf_table *t, size_t row)
{
    assert(row < t->n_rows);
    const column *v = &t->cols[VALUE_COL];
    return t->summary && !(v->cell_kind && v->cell_kind[row] != COLUMN_KIND) && tf_table_is_empty(t, row, VALUE_COL) &&
           tf_table_is_empty(t, row, NOTE_COL);
}

tf_status tf_table_add_heading(tf_table *t, const char *label, tf_error *err)
{
    size_t r = SIZE_MAX;
    return add_item_row(t, label, NULL, &r, err);
}
