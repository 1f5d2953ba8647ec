/* The contents table of a folder of results: one row per CSV file, with the population it is
 * about, the file relative to the folder, the workbook sheet showing the same table and a line on
 * what it holds. (The report writer lists its own files under the same columns, export/report.h.) */
#ifndef TF_CONTENTS_TABLE_H
#define TF_CONTENTS_TABLE_H

#include "export/table.h"
#include "util/error.h"

/* A new empty contents table; NULL when out of memory (in err). */
tf_table *tf_contents_table_new(tf_error *err);

/* Appends a row; population, sheet and about may be NULL (blank). */
tf_status tf_contents_table_add(tf_table *t, const char *population, const char *file, const char *sheet,
                                const char *about, tf_error *err);

#endif
