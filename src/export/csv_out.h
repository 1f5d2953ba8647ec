/* Writing an export table as a CSV file: one header row, then one line per row. */
#ifndef TF_CSV_OUT_H
#define TF_CSV_OUT_H

#include <stdio.h>

#include "export/table.h"
#include "util/error.h"

/* Room for any number tf_csv_format_number writes, with its terminating NUL. */
#define TF_CSV_NUMBER_MAX 32

/* Writes v into buf (size >= TF_CSV_NUMBER_MAX) as the shortest decimal that strtod reads back
 * as exactly v; "" for NAN, "inf" / "-inf" for infinities. Returns the length written. */
size_t tf_csv_format_number(double v, char *buf, size_t size);

/* Writes into buf a file name for a table named table_name: ASCII letters lowered, digits, '-' and
 * '_' kept, every other run of characters made one '-', ends trimmed, then ".csv"
 * ("Projection / risk" -> "projection-risk.csv"; nothing left -> "table.csv"). buf of size
 * >= 8; a long name is shortened to fit. */
void tf_csv_file_name(const char *table_name, char *buf, size_t size);

/* Writes t to out: the column headers, then the rows. Text is quoted as RFC 4180 section 2
 * prescribes when it holds a comma, a double quote, CR or LF (quotes doubled); numbers as
 * tf_csv_format_number (so a reader gets the exact doubles back); empty cells as nothing; lines
 * end with CRLF (RFC 4180 section 2, rule 1). Notes, legends and warning flags are not written.
 * Returns TF_ERR_IO when out reports a write error; where names the output in messages (may be NULL). */
/* Writes s as one CSV field (RFC 4180): quoted, with quotes doubled, when it holds a comma, a
 * quote or a line end. */
void tf_csv_write_field(FILE *out, const char *s);

tf_status tf_csv_write_stream(const tf_table *t, FILE *out, const char *where, tf_error *err);

/* Writes t to path atomically (export/atomic.h): the old file, if any, stays until the new one
 * is complete; refuses to write over protect (the input file; may be NULL). */
tf_status tf_csv_write(const tf_table *t, const char *path, const char *protect, tf_error *err);

/* Writes t to dir/<tf_csv_file_name>, as tf_csv_write. dir must exist (tf_atomic_mkdirs). When
 * path_out is not NULL the path written is copied there (truncated to path_size). */
tf_status tf_csv_write_in_dir(const tf_table *t, const char *dir, const char *protect, char *path_out,
                              size_t path_size, tf_error *err);

/* Writes n tables into dir, each to its tf_csv_file_name, all or none (tf_atomic_commit_all):
 * when any of them cannot be written, every file in dir stays as it was. Tables whose names give
 * the same file name are refused (TF_ERR_INVALID) before anything is written; refuses to write
 * over protect (may be NULL). dir must exist. Errors name the file. */
tf_status tf_csv_write_all(const tf_table *const *tables, size_t n, const char *dir, const char *protect,
                           tf_error *err);

#endif
