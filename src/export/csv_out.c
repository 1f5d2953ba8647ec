/* CSV output of export tables (RFC 4180 quoting, exact round-trip numbers, atomic files). */
#include "export/csv_out.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "export/atomic.h"

size_t tf_csv_format_number(double v, char *buf, size_t size)
{
    if (isnan(v)) {
        buf[0] = '\0';
        return 0;
    }
    if (isinf(v))
        return (size_t)snprintf(buf, size, "%s", v > 0 ? "inf" : "-inf");
    /* Any decimal of at most DBL_DIG = 15 significant digits survives a trip through a normal
     * double (C11 5.2.4.2.2), so for those %.15g already gives the shortest form; 17 digits
     * always suffice to identify a double (IEEE 754-2008, 5.12.2). Trying 15, 16, 17 in turn
     * therefore yields the shortest string that reads back exactly. Subnormals carry fewer
     * bits, so their shortest form may have fewer digits than %.15g prints: search from 1. */
    int n = 0;
    for (int prec = fabs(v) < DBL_MIN ? 1 : 15; prec <= 17; prec++) {
        n = snprintf(buf, size, "%.*g", prec, v);
        if (prec == 17 || strtod(buf, NULL) == v)
            break;
    }
    return (size_t)n;
}

void tf_csv_file_name(const char *table_name, char *buf, size_t size)
{
    const size_t ext = sizeof ".csv";   /* includes the NUL */
    size_t max = size > ext ? size - ext : 0, n = 0;
    int pending_dash = 0;
    for (const unsigned char *p = (const unsigned char *)table_name; *p && n < max; p++) {
        unsigned char c = *p;
        if (c >= 'A' && c <= 'Z')
            c = (unsigned char)(c - 'A' + 'a');
        if ((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' || c == '-') {
            if (pending_dash && n > 0 && n + 1 < max)
                buf[n++] = '-';
            pending_dash = 0;
            buf[n++] = (char)c;
        } else {
            pending_dash = 1;
        }
    }
    while (n > 0 && buf[n - 1] == '-')
        n--;
    if (n == 0) {
        snprintf(buf, size, "table.csv");
        return;
    }
    snprintf(buf + n, size - n, ".csv");
}

void tf_csv_write_field(FILE *out, const char *s)
{
    if (!strpbrk(s, ",\"\r\n")) {
        fputs(s, out);
        return;
    }
    putc('"', out);
    for (const char *p = s; *p; p++) {
        if (*p == '"')
            putc('"', out);
        putc(*p, out);
    }
    putc('"', out);
}

tf_status tf_csv_write_stream(const tf_table *t, FILE *out, const char *where, tf_error *err)
{
    size_t n_cols = tf_table_n_columns(t), n_rows = tf_table_n_rows(t);
    for (size_t j = 0; j < n_cols; j++) {
        if (j)
            putc(',', out);
        tf_csv_write_field(out, tf_table_header(t, j));
    }
    fputs("\r\n", out);
    char num[TF_CSV_NUMBER_MAX];
    for (size_t i = 0; i < n_rows && !ferror(out); i++) {
        for (size_t j = 0; j < n_cols; j++) {
            if (j)
                putc(',', out);
            const char *text = tf_table_text(t, i, j);
            if (text) {
                tf_csv_write_field(out, text);
            } else {
                tf_csv_format_number(tf_table_number(t, i, j), num, sizeof num);
                fputs(num, out);
            }
        }
        fputs("\r\n", out);
    }
    if (ferror(out))
        return tf_error_add(err, TF_ERR_IO, where, 0, 0, NULL, "cannot write table '%s'", tf_table_name(t));
    return TF_OK;
}

tf_status tf_csv_write(const tf_table *t, const char *path, const char *protect, tf_error *err)
{
    tf_atomic *a;
    tf_status st = tf_atomic_open(path, protect, &a, err);
    if (st != TF_OK)
        return st;
    /* The stream's own error flag is checked by tf_atomic_commit, which also reports errno. */
    tf_csv_write_stream(t, tf_atomic_stream(a), path, NULL);
    return tf_atomic_commit(a, err);
}

/* A new "dir/<file name of t>" (malloc'd; NULL when out of memory). */
static char *path_in_dir(const tf_table *t, const char *dir)
{
    char name[128];
    tf_csv_file_name(tf_table_name(t), name, sizeof name);
    size_t dl = strlen(dir), len = dl + 1 + strlen(name) + 1;
    char *path = malloc(len);
    if (path)
        snprintf(path, len, "%s%s%s", dir, (dl && dir[dl - 1] == '/') ? "" : "/", name);
    return path;
}

tf_status tf_csv_write_in_dir(const tf_table *t, const char *dir, const char *protect, char *path_out,
                              size_t path_size, tf_error *err)
{
    char *path = path_in_dir(t, dir);
    if (!path)
        return tf_error_add(err, TF_ERR_NOMEM, dir, 0, 0, NULL, "out of memory");
    tf_status st = tf_csv_write(t, path, protect, err);
    if (path_out && path_size)
        snprintf(path_out, path_size, "%s", path);
    free(path);
    return st;
}

tf_status tf_csv_write_all(const tf_table *const *tables, size_t n, const char *dir, const char *protect,
                           tf_error *err)
{
    tf_atomic **files = calloc(n ? n : 1, sizeof *files);
    if (!files)
        return tf_error_add(err, TF_ERR_NOMEM, dir, 0, 0, NULL, "out of memory");
    tf_status st = TF_OK;
    for (size_t i = 0; i < n && st == TF_OK; i++) {
        char *path = path_in_dir(tables[i], dir);
        if (!path) {
            st = tf_error_add(err, TF_ERR_NOMEM, dir, 0, 0, NULL, "out of memory");
            break;
        }
        for (size_t j = 0; j < i && st == TF_OK; j++)
            if (!strcmp(tf_atomic_path(files[j]), path))
                st = tf_error_add(err, TF_ERR_INVALID, path, 0, 0, "give the tables different names",
                                  "tables '%s' and '%s' would both be written to this file",
                                  tf_table_name(tables[j]), tf_table_name(tables[i]));
        if (st == TF_OK && (st = tf_atomic_open(path, protect, &files[i], err)) == TF_OK)
            /* Write errors stay on the stream and are reported by the commit, with errno. */
            tf_csv_write_stream(tables[i], tf_atomic_stream(files[i]), path, NULL);
        free(path);
    }
    if (st == TF_OK) {
        st = tf_atomic_commit_all(files, n, err);
    } else {
        for (size_t i = 0; i < n; i++)
            tf_atomic_abort(files[i]);
    }
    free(files);
    return st;
}
