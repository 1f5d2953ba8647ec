/* Where a result came from: the input file's SHA-256, the date of the run, and the tool's
 * version, so that a reader of a report can tell which data and which program made it. */
#ifndef TF_PROVENANCE_H
#define TF_PROVENANCE_H

#include <stddef.h>
#include <time.h>

#include "util/error.h"

/* Room for a SHA-256 in hexadecimal with its NUL. */
#define TF_PROVENANCE_HASH_BUF 65
/* Room for a date and time such as "2025-03-14 09:26:53 UTC". */
#define TF_PROVENANCE_DATE_BUF 32

/* Writes the SHA-256 (FIPS 180-4) of the file at path into hex as 64 lower-case hexadecimal
 * digits (hex has TF_PROVENANCE_HASH_BUF bytes). TF_ERR_IO (with the system's reason) when the
 * file cannot be read; hex is then "". */
tf_status tf_provenance_hash_file(const char *path, char *hex, tf_error *err);

/* The same for bytes in memory. */
void tf_provenance_hash_bytes(const void *data, size_t len, char *hex);

/* The time of the run: $SOURCE_DATE_EPOCH when it holds a whole number of seconds (the
 * reproducible-builds convention, so that a run can be repeated bit for bit), else now. */
time_t tf_provenance_now(void);

/* Writes t as "YYYY-MM-DD HH:MM:SS UTC" into buf (TF_PROVENANCE_DATE_BUF bytes). */
void tf_provenance_format_date(time_t t, char *buf);

#endif
