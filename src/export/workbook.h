/* Building a spreadsheet workbook (.xlsx, libxlsxwriter) from export tables: one sheet per table,
 * with legends, number formats, highlighted warnings and notes, native charts over the sheets'
 * data, and an atomic write on close so that a failed run never leaves a broken workbook. */
#ifndef TF_WORKBOOK_H
#define TF_WORKBOOK_H

#include <stddef.h>

#include "export/table.h"
#include "util/error.h"

typedef struct tf_workbook tf_workbook;
/* A sheet of a workbook; owned by the workbook, valid until it is closed or freed. */
typedef struct tf_sheet tf_sheet;

/* Excel's limit on a sheet name, in characters. */
#define TF_SHEET_NAME_MAX 31
/* A buffer that holds any cleaned sheet name (31 characters of up to 4 UTF-8 bytes, a suffix, NUL). */
#define TF_SHEET_NAME_BUF 160

/* Writes into buf (size >= TF_SHEET_NAME_BUF) a sheet name Excel accepts, made from name: each
 * of [ ] : * ? / \ becomes '_', control characters become ' ', bytes that are not UTF-8 become
 * '_', leading and trailing apostrophes and spaces are dropped, the reserved name "History" gets a
 * trailing '_', an empty result becomes "Sheet", and the name is cut to TF_SHEET_NAME_MAX
 * characters. Workbooks also make names unique (see tf_workbook_add_table). */
void tf_workbook_clean_sheet_name(const char *name, char *buf, size_t size);

/* Starts a workbook that will be written to path (atomically, on tf_workbook_close). Refuses a
 * path that is the protected input file (protect; may be NULL), a directory, or a path in a
 * directory that does not exist. Copies both strings. Returns NULL and fills err (TF_ERR_USAGE,
 * TF_ERR_IO, TF_ERR_NOMEM) on failure. The caller ends with tf_workbook_close or tf_workbook_free. */
tf_workbook *tf_workbook_new(const char *path, const char *protect, tf_error *err);

/* Abandons the workbook: nothing is written, the temporary is removed. Accepts NULL. */
void tf_workbook_free(tf_workbook *wb);

/* Writes the workbook to its path: assembled into a temporary beside it, then renamed over the
 * path. Always frees wb. If anything failed earlier (a tf_workbook_add_* call returned an error)
 * or the write fails, no file is written, the temporary is removed, the old file (if any) is
 * untouched, and the status is TF_ERR_IO (with libxlsxwriter's reason) or the earlier error. */
tf_status tf_workbook_close(tf_workbook *wb, tf_error *err);

/* Adds a sheet showing t; the sheet is named after the table (cleaned, and made unique with a
 * " (2)", " (3)" suffix; Excel compares names without regard to case). Everything is copied from
 * t, which the caller may free afterwards. When sheet is not NULL it receives the sheet, for
 * charts.
 *
 * An ordinary table is laid out as: its notes (one merged, wrapped line each; cautions in a
 * highlighted format), the header row (bold), a legend row (each column's legend, wrapped), then
 * the data rows; the rows down to the legend are frozen. Numbers are written as numbers in the
 * column's (or cell's) kind: percent `[<0.001]"< 0.1 %";[>0.999]"> 99.9 %";0.0 %` when every
 * value of the column lies in [0, 1] (a share or a probability: 0.0004 reads "< 0.1 %", and so
 * does 0, a Monte Carlo frequency with nothing counted), else `0.0 %` (a change with a sign);
 * probability 0.000, integer and year 0, other numbers with digits chosen from the column's
 * largest magnitude; empty cells stay blank; infinities are written as the text "inf" / "-inf".
 * Cells flagged as warnings are coloured. Headings are right-aligned over numbers.
 *
 * A summary table (tf_table_new_summary) is laid out for reading: notes, an "Item | Value |
 * Note" header, then one row per item with its value in the item's own kind (a percentage by
 * its own value), headings in bold. Item, value and note wrap; the item column fits its labels
 * up to a cap, the three together fit a portrait A4 page at full size, a long text value with no
 * note spreads over the note column, and each row is as high as its wrapped text.
 *
 * Printing (set when the workbook is closed, for every sheet): A4, 0.5 in side margins, one page
 * wide and as many tall as needed, the heading rows (and legend row) repeated on each page, the
 * sheet name and "Page N of M" in the footer; portrait when the printed width (columns, merged
 * notes, charts) fits a portrait page at full size, else landscape; a sheet that one landscape
 * page would shrink below 60 % prints at 60 % over pages across, its leading text columns
 * repeated on each page.
 *
 * Column widths fit headers, cells and (capped) legends. Fails with TF_ERR_IO (libxlsxwriter's
 * reason, e.g. too many rows for a sheet) or TF_ERR_NOMEM; the workbook then cannot be written. */
tf_status tf_workbook_add_table(tf_workbook *wb, const tf_table *t, tf_sheet **sheet, tf_error *err);

/* The sheet's final name (after cleaning and de-duplication). */
const char *tf_sheet_name(const tf_sheet *s);

/* Chart kinds. An x-y chart plots series against a numeric x column (years, projection horizon)
 * on a value axis, so gaps in the years are shown to scale; a column chart draws one group of
 * bars per row, labelled by the x column (model names). */
typedef enum {
    TF_CHART_XY = 0,
    TF_CHART_COLUMNS,
} tf_chart_kind;

/* How an x-y series is drawn (ignored by column charts). */
typedef enum {
    TF_SERIES_LINE = 0,  /* solid line, no markers: an estimate or a projection */
    TF_SERIES_POINTS,    /* markers only: observed counts */
    TF_SERIES_BAND,      /* thin dashed line in the colour of the line before it: one bound of an interval */
} tf_series_look;

typedef struct {
    size_t column;        /* the table column holding the y values */
    const char *name;     /* legend entry; NULL = the column's header */
    tf_series_look look;
} tf_chart_series;

/* A chart in plain terms. Zero-initialise and fill what is needed:
 *   observed counts, trend and 95 % band over years:
 *     tf_chart_series s[] = {{count_col, "Observed", TF_SERIES_POINTS}, {median_col, "Trend", TF_SERIES_LINE},
 *                            {lo_col, "95% lower", TF_SERIES_BAND}, {hi_col, "95% upper", TF_SERIES_BAND}};
 *     tf_chart_spec c = {.kind = TF_CHART_XY, .title = "...", .x_title = "Year", .y_title = "Animals",
 *                        .data = sheet, .x_column = year_col, .series = s, .n_series = 4};
 *   quasi-extinction curves: the same with one TF_SERIES_LINE per threshold column;
 *   posterior model probabilities: .kind = TF_CHART_COLUMNS, .x_column = the model-name column. */
typedef struct {
    tf_chart_kind kind;
    const char *title;      /* may be NULL */
    const char *x_title;    /* may be NULL */
    const char *y_title;    /* may be NULL */
    const tf_sheet *data;   /* the sheet whose table holds the data (required) */
    size_t x_column;        /* x values (XY) or category labels (COLUMNS) */
    const tf_chart_series *series;
    size_t n_series;        /* at least 1 */
    size_t first_row;       /* first table row plotted (0 = the first data row) */
    size_t n_rows;          /* rows plotted; 0 = every row from first_row on */
    /* For a table in long form (one block of rows per threshold, say): when > 0, series k plots
     * the n_rows rows from first_row + k * series_stride, so each series gets its own block.
     * n_rows must then be given. 0 = every series plots the same rows. */
    size_t series_stride;
    const tf_sheet *place;  /* sheet the chart is drawn on; NULL = the data sheet */
    const char *anchor;     /* top-left cell such as "H3"; NULL = below the table and earlier charts */
} tf_chart_spec;

/* Adds a native chart whose series refer to the data sheet's cells (so a reader who edits a value
 * sees the chart follow). When the x column is a year or integer column, the x axis of an XY
 * chart spans exactly the plotted rows' range, without decimals; a y axis takes the first
 * series' percent or probability format, and starts at 0 when every series is one. Automatic
 * placement puts the chart below the table, each further chart below the previous one.
 * Fails with TF_ERR_INVALID for a column or row out of range, no series, a sheet of another
 * workbook or a bad anchor, leaving the workbook as it was; with TF_ERR_IO or TF_ERR_NOMEM from
 * libxlsxwriter (the workbook then cannot be written). Copies all strings. */
tf_status tf_workbook_add_chart(tf_workbook *wb, const tf_chart_spec *spec, tf_error *err);

#endif
