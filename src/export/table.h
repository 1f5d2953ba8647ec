/* An in-memory table handed to the exporters: named columns with a legend and a display kind,
 * rows of numbers or text, warning flags, and note lines. It holds results; it computes nothing. */
#ifndef TF_TABLE_H
#define TF_TABLE_H

#include <stdbool.h>
#include <stddef.h>

#include "util/error.h"

/* How a column's numbers are meant to be read; the exporters pick display formats from it. */
typedef enum {
    TF_COL_NUMBER = 0,   /* a measured or estimated quantity; digits chosen from its size */
    TF_COL_INTEGER,      /* a whole number: a count, a sample size */
    TF_COL_PERCENT,      /* a fraction shown as a percentage: store 0.25 for 25 % */
    TF_COL_PROBABILITY,  /* a probability in [0, 1], shown with three decimals */
    TF_COL_TEXT,         /* words: a model name, a label */
    TF_COL_YEAR,         /* a calendar year, shown without a thousands separator */
    TF_COL_KIND_COUNT
} tf_col_kind;

/* A short name for a kind ("number", "integer", ...); "unknown" for values out of range. */
const char *tf_col_kind_name(tf_col_kind kind);

/* How a note line is shown above the table. */
typedef enum {
    TF_NOTE_INFO = 0,    /* context: what the table is, how it was made */
    TF_NOTE_CAUTION,     /* something the reader must know before trusting the numbers */
} tf_note_kind;

/* Pass as the column to tf_table_set_warning to flag every cell of a row. */
#define TF_TABLE_WHOLE_ROW ((size_t)-1)
/* Returned by tf_table_find_column when no column has the header. */
#define TF_TABLE_NO_COLUMN ((size_t)-1)

typedef struct tf_table tf_table;

/* A new empty table. name (required, non-empty) names the CSV file and the worksheet; the
 * exporters make it safe for each (see tf_csv_file_name, tf_workbook_clean_sheet_name).
 * Copies name. Returns NULL and fills err (TF_ERR_INVALID for an empty name, TF_ERR_NOMEM).
 * The caller frees with tf_table_free. */
tf_table *tf_table_new(const char *name, tf_error *err);

/* Accepts NULL. */
void tf_table_free(tf_table *t);

/* Renames the table (a copy of name; required, non-empty), e.g. to tell apart the same table of
 * several populations. TF_ERR_INVALID for an empty name, TF_ERR_NOMEM; the old name stays then. */
tf_status tf_table_set_name(tf_table *t, const char *name, tf_error *err);

/* Appends a column. header (required, non-empty) is the column's title; legend (may be NULL) is
 * one line saying what the column means and its units. Columns must all be added before the
 * first row (TF_ERR_INVALID otherwise). Copies both strings. On success stores the new column's
 * index in *col when col is not NULL. */
tf_status tf_table_add_column(tf_table *t, const char *header, const char *legend, tf_col_kind kind,
                              size_t *col, tf_error *err);

/* Gives column col the heading readers of the workbook see (e.g. "Lower 95 %" for the CSV
 * header "lower_95"); a copy, NULL or "" = the header itself. TF_ERR_NOMEM on failure. */
tf_status tf_table_set_label(tf_table *t, size_t col, const char *label, tf_error *err);
/* The column's label, or its header when it has none. */
const char *tf_table_label(const tf_table *t, size_t col);

/* Appends a row of empty cells (NAN, no text) and stores its index in *row when row is not
 * NULL. Storage grows geometrically; numbers are never allocated one by one. */
tf_status tf_table_add_row(tf_table *t, size_t *row, tf_error *err);

/* Appends a row and fills its first n cells with values (NAN = empty); n must not exceed the
 * number of columns (TF_ERR_INVALID). Text columns among them receive the numbers as numbers. */
tf_status tf_table_add_row_numbers(tf_table *t, const double *values, size_t n, tf_error *err);

/* Sets a cell to a number (NAN = empty; +-infinity is kept, and shown as "inf"/"-inf" since
 * spreadsheets have no infinity). Replaces any text in the cell. row and col must be in range
 * (asserted: indices come from the program, not from the user). */
void tf_table_set_number(tf_table *t, size_t row, size_t col, double value);

/* Sets a cell to a copy of text (NULL or "" = empty cell). Replaces any number in the cell.
 * Text cells are allowed in every column, so that a column of numbers can say "n/a" where a
 * value does not exist. Fails only with TF_ERR_NOMEM, leaving the cell as it was. */
tf_status tf_table_set_text(tf_table *t, size_t row, size_t col, const char *text, tf_error *err);

/* Gives one cell its own display kind instead of its column's (a summary row that holds a
 * percentage in a column of mixed values). TF_ERR_NOMEM on failure. */
tf_status tf_table_set_cell_kind(tf_table *t, size_t row, size_t col, tf_col_kind kind, tf_error *err);

/* Flags a cell (or with col = TF_TABLE_WHOLE_ROW the whole row) as a warning, e.g. an R-hat above
 * its threshold; the writers only colour what is flagged. TF_ERR_NOMEM on failure. */
tf_status tf_table_set_warning(tf_table *t, size_t row, size_t col, tf_error *err);

/* Appends a note line shown above the table in the workbook. Copies text (required). */
tf_status tf_table_add_note(tf_table *t, tf_note_kind kind, const char *text, tf_error *err);
/* The same with a printf-style format. */
tf_status tf_table_add_notef(tf_table *t, tf_note_kind kind, tf_error *err, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

/* Accessors. Indices must be in range (asserted). Strings are owned by the table: the name,
 * headers, legends and notes stay valid until the table is freed; cell text (tf_table_text)
 * only until the next call that changes the table, since all cell text shares one buffer. */
const char *tf_table_name(const tf_table *t);
size_t tf_table_n_columns(const tf_table *t);
size_t tf_table_n_rows(const tf_table *t);
const char *tf_table_header(const tf_table *t, size_t col);
const char *tf_table_legend(const tf_table *t, size_t col);   /* "" when none */
tf_col_kind tf_table_column_kind(const tf_table *t, size_t col);
/* The index of the first column with this header, or TF_TABLE_NO_COLUMN. */
size_t tf_table_find_column(const tf_table *t, const char *header);
/* The cell's text, or NULL when the cell holds a number or is empty. */
const char *tf_table_text(const tf_table *t, size_t row, size_t col);
/* The cell's number; NAN when the cell holds text or is empty. */
double tf_table_number(const tf_table *t, size_t row, size_t col);
/* True when the cell holds neither text nor a number. */
bool tf_table_is_empty(const tf_table *t, size_t row, size_t col);
/* The cell's display kind: its own when set, else its column's. */
tf_col_kind tf_table_cell_kind(const tf_table *t, size_t row, size_t col);
bool tf_table_warning(const tf_table *t, size_t row, size_t col);
size_t tf_table_n_notes(const tf_table *t);
const char *tf_table_note(const tf_table *t, size_t i);
tf_note_kind tf_table_note_kind(const tf_table *t, size_t i);

/* Asks the workbook writer for sort and filter buttons over the columns (a table of many rows
 * that readers sort, such as one row per population). Off by default; CSV files ignore it. */
void tf_table_set_filter(tf_table *t, bool on);
bool tf_table_filter(const tf_table *t);

/* A key-value table for a first page of results: columns "population", "item", "value", "note"
 * (the workbook hides the population column: the page's headings name it). Values are
 * numbers or text, each row with its own display kind; tf_table_add_heading adds section
 * headings. The row each call adds is tf_table_n_rows(t) - 1 (to flag it with
 * tf_table_set_warning). On failure no row is added. */
tf_table *tf_table_new_summary(const char *name, tf_error *err);
/* The population written into the rows added from now on (a copy; NULL or "" = none). */
tf_status tf_table_set_summary_population(tf_table *t, const char *label, tf_error *err);
/* Appends "label | value | note" with value shown as kind (note may be NULL). */
tf_status tf_table_add_item_number(tf_table *t, const char *label, double value, tf_col_kind kind,
                                   const char *note, tf_error *err);
/* Appends "label | text | note" (note may be NULL). */
tf_status tf_table_add_item_text(tf_table *t, const char *label, const char *text, const char *note,
                                 tf_error *err);
/* Appends a section heading row. */
tf_status tf_table_add_heading(tf_table *t, const char *label, tf_error *err);
/* True for a heading row of a summary table (a label with no value, kind or note). */
bool tf_table_is_heading(const tf_table *t, size_t row);
/* True when the table was made by tf_table_new_summary. */
bool tf_table_is_summary(const tf_table *t);

#endif
