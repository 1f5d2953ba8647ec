/* A report: an ordered set of export tables, each shown as one sheet of a workbook and written as
 * its CSV twin, with native charts over them; written all or nothing, so an interrupted or failed
 * run leaves the previous files (if any) and never a mix of old and new or a half-written one. */
#ifndef TF_REPORT_H
#define TF_REPORT_H

#include <signal.h>
#include <stddef.h>

#include "export/table.h"
#include "export/workbook.h"
#include "util/error.h"

/* The file, written beside the CSV twins, that maps each sheet to its CSV file. */
#define TF_REPORT_CONTENTS_CSV "contents.csv"

/* Pass as a chart's place to draw it on its data table's own sheet. */
#define TF_REPORT_SAME_SHEET ((size_t)-1)

typedef struct tf_report tf_report;

/* A new empty report. NULL when out of memory (err filled). Free with tf_report_free. */
tf_report *tf_report_new(tf_error *err);

/* Frees the report and every table it holds. Accepts NULL. */
void tf_report_free(tf_report *r);

/* Appends table t as the next sheet and CSV twin; the report takes ownership of t at once,
 * also on failure (it is then freed). about (may be NULL) is one line for the contents file.
 * The CSV file name comes from the table's name (tf_csv_file_name), made unique within the
 * report with "-2", "-3"... On success stores the table's index in *index when not NULL.
 * Errors: TF_ERR_NOMEM, TF_ERR_INVALID for a NULL table. */
tf_status tf_report_add_table(tf_report *r, tf_table *t, const char *about, size_t *index, tf_error *err);

/* Where table index's CSV twin goes: folder (a single folder name inside the CSV folder, such as
 * a population's; NULL or "" = the CSV folder itself) and the file stem (e.g. "draws"; made a
 * file name and unique within the folder as tf_report_add_table does). population (may be NULL)
 * is what the contents file says the table is about. TF_ERR_INVALID for a bad index or folder
 * (a path, "." or ".."), TF_ERR_NOMEM. */
tf_status tf_report_set_place(tf_report *r, size_t index, const char *population, const char *folder,
                              const char *stem, tf_error *err);
/* The folder of table index's CSV twin ("" = the CSV folder). */
const char *tf_report_csv_folder(const tf_report *r, size_t index);

/* Keeps table index out of the workbook, as CSV only: for a table longer than a sheet can hold
 * (TF_REPORT_SHEET_ROWS), or one too bulky for the people who open the workbook (the raw draws).
 * The CSV twin is written as for any table, and its contents row names no sheet. A chart over it
 * is refused. An index out of range is ignored. */
void tf_report_set_csv_only(tf_report *r, size_t index);
/* Whether table index is written as CSV only. */
int tf_report_csv_only(const tf_report *r, size_t index);

/* Data rows a sheet holds with room for notes, header and legend (Excel's 1,048,576 rows less a
 * margin of 64). */
#define TF_REPORT_SHEET_ROWS ((size_t)1048576 - 64)

size_t tf_report_n_tables(const tf_report *r);
const tf_table *tf_report_table(const tf_report *r, size_t index);
/* The about line of table index ("" when none). */
const char *tf_report_about(const tf_report *r, size_t index);
/* The CSV file name of table index (no directory). */
const char *tf_report_csv_name(const tf_report *r, size_t index);

/* A chart in table terms: like tf_chart_spec, but the data and the placement are tables of the
 * report (by index) instead of sheets, since sheets exist only while the report is written. */
typedef struct {
    tf_chart_kind kind;
    const char *title, *x_title, *y_title;   /* each may be NULL */
    size_t data;                             /* index of the table holding the data */
    size_t x_column;
    const tf_chart_series *series;
    size_t n_series;
    size_t first_row, n_rows, series_stride; /* as tf_chart_spec */
    size_t place;                            /* table whose sheet shows the chart; TF_REPORT_SAME_SHEET */
    const char *anchor;                      /* as tf_chart_spec; NULL = automatic */
} tf_report_chart;

/* Adds a chart (everything copied). Columns, rows and tables are checked here so that a mistake
 * shows before anything is written: TF_ERR_INVALID for a table or column out of range, no series
 * or no rows; TF_ERR_NOMEM. */
tf_status tf_report_add_chart(tf_report *r, const tf_report_chart *c, tf_error *err);

/* Writes the workbook to xlsx_path and every table as CSV into csv_dir (created with its parents
 * when missing), plus TF_REPORT_CONTENTS_CSV listing population, CSV file (relative to csv_dir), sheet
 * name and the about line of each table; the folders of tf_report_set_place are made as needed. Neither may be, or be written over, protect (the input file; may be NULL).
 * Every CSV goes to a temporary first; the workbook is assembled and renamed into place, then
 * the CSV temporaries are renamed over their names together (tf_atomic_commit_all). When *stop
 * (may be NULL) becomes non-zero before the workbook is renamed, nothing is written and
 * TF_ERR_INTERRUPTED is returned. On any failure before that point nothing is written either:
 * temporaries are removed, and so are the folders this call made (TF_ERR_IO, TF_ERR_USAGE for
 * the protected file, TF_ERR_NOMEM, or the workbook's errors). Should the CSV renames then fail,
 * the CSV files are as before and the error (TF_ERR_IO) says so; the new workbook stays.
 * The report itself is not changed and may be written again. csv_dir NULL writes the workbook
 * alone (for callers that write the tables in a layout of their own). */
tf_status tf_report_write(const tf_report *r, const char *xlsx_path, const char *csv_dir, const char *protect,
                          const volatile sig_atomic_t *stop, tf_error *err);

#endif
