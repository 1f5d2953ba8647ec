/* Status names and the error record. */
#include "util/error.h"

#include <stdarg.h>
#include <string.h>

static const char *const status_names[] = {
    "success",
    "out of memory",
    "input/output error",
    "malformed input",
    "invalid input",
    "value out of range",
    "numerical failure",
    "interrupted",
    "not supported",
    "usage error",
};

_Static_assert(sizeof status_names / sizeof status_names[0] == TF_STATUS_COUNT,
               "status_names and tf_status must have the same length");

const char *tf_strerror(tf_status status)
{
    if ((int)status < 0 || status >= TF_STATUS_COUNT)
        return "unknown status";
    return status_names[status];
}

void tf_error_init(tf_error *err)
{
    if (err) {
        err->n_items = 0;
        err->n_dropped = 0;
    }
}

tf_status tf_error_add(tf_error *err, tf_status status, const char *file, long line, long column,
                       const char *hint, const char *fmt, ...)
{
    if (!err)
        return status;
    if (err->n_items >= TF_ERROR_MAX) {
        err->n_dropped++;
        return status;
    }
    tf_error_item *it = &err->items[err->n_items++];
    it->status = status;
    snprintf(it->file, sizeof it->file, "%s", file ? file : "");
    it->line = line;
    it->column = column;
    snprintf(it->hint, sizeof it->hint, "%s", hint ? hint : "");
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(it->what, sizeof it->what, fmt, ap);
    va_end(ap);
    return status;
}

tf_status tf_error_status(const tf_error *err)
{
    return (err && err->n_items) ? err->items[0].status : TF_OK;
}

tf_status tf_error_restatus(tf_error *err, size_t from, tf_status st)
{
    for (size_t i = from; err && i < err->n_items; i++)
        err->items[i].status = st;
    return st;
}

void tf_error_print(const tf_error *err, const char *prog, FILE *out)
{
    if (!err)
        return;
    tf_error_print_first(err, err->n_items, prog, out);
    if (err->n_dropped)
        fprintf(out, "%s: (%zu more error%s not shown)\n", prog ? prog : "tallyfit", err->n_dropped,
                err->n_dropped == 1 ? "" : "s");
}

void tf_error_print_first(const tf_error *err, size_t n, const char *prog, FILE *out)
{
    if (!err)
        return;
    for (size_t i = 0; i < err->n_items && i < n; i++) {
        const tf_error_item *it = &err->items[i];
        fprintf(out, "%s: error: ", prog ? prog : "tallyfit");
        if (it->file[0]) {
            fputs(it->file, out);
            if (it->line > 0)
                fprintf(out, ":%ld", it->line);
            if (it->column > 0)
                fprintf(out, ":%ld", it->column);
            fputs(": ", out);
        }
        fprintf(out, "%s\n", it->what);
        if (it->hint[0])
            fprintf(out, "  hint: %s\n", it->hint);
    }
}
