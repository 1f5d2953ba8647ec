/* Status codes and the caller-owned error record that carries what went wrong, and where, up to main. */
#ifndef TF_ERROR_H
#define TF_ERROR_H

#include <stddef.h>
#include <stdio.h>

/* Keep in step with the string table in error.c (a unit test checks the lengths). */
typedef enum {
    TF_OK = 0,
    TF_ERR_NOMEM,       /* allocation failed */
    TF_ERR_IO,          /* a file could not be opened, read or written */
    TF_ERR_PARSE,       /* malformed input text */
    TF_ERR_INVALID,     /* well-formed but unusable input (bad value, unknown name) */
    TF_ERR_RANGE,       /* a number outside its allowed range */
    TF_ERR_NUMERIC,     /* a computation failed (overflow, degenerate weights) */
    TF_ERR_INTERRUPTED, /* stopped by a signal */
    TF_ERR_UNSUPPORTED, /* a combination the tool refuses on purpose */
    TF_ERR_USAGE,       /* bad command-line use */
    TF_STATUS_COUNT
} tf_status;

/* A short English name for a status; never NULL. */
const char *tf_strerror(tf_status status);

/* The most messages one record keeps; later ones are counted in n_dropped. */
#define TF_ERROR_MAX 20

typedef struct {
    tf_status status;
    char file[256];   /* "" when not about a file */
    long line;        /* 1-based; 0 = none */
    long column;      /* 1-based; 0 = none */
    char what[512];
    char hint[256];   /* "" when there is nothing to suggest */
} tf_error_item;

/* A caller-owned record of up to TF_ERROR_MAX messages. Transparent on purpose: it lives on the
 * caller's stack (no allocation), so it works when memory has run out. Zero it with
 * tf_error_init before use; one record belongs to one thread. */
typedef struct {
    size_t n_items;
    size_t n_dropped;
    tf_error_item items[TF_ERROR_MAX];
} tf_error;

void tf_error_init(tf_error *err);

/* Adds a message and returns status, so deep code can write `return tf_error_add(...)`.
 * err may be NULL (the message is then discarded). file may be NULL; line/column 0 = none;
 * hint may be NULL. fmt is printf-style. */
tf_status tf_error_add(tf_error *err, tf_status status, const char *file, long line, long column,
                       const char *hint, const char *fmt, ...)
    __attribute__((format(printf, 7, 8)));

/* The status of the first message, or TF_OK when the record is empty. */
tf_status tf_error_status(const tf_error *err);

/* Gives the messages err received from index from on (err->n_items before the call that failed)
 * the status st, and returns st: for a caller that judges what a callee's failure means at its
 * own level (a model file that cannot be read is, to a command that fits, an unusable input), so
 * that one failure has one status whichever path met it. err may be NULL. */
tf_status tf_error_restatus(tf_error *err, size_t from, tf_status st);

/* The one printer of errors: every message as "prog: error: what", or "prog: error:
 * file:line:column: what" when it names a place in a file (the form of the commands' warnings),
 * each followed by "  hint: ..." when it has one, then a count of dropped messages. prog is the
 * command ("tallyfit fit"); NULL prints "tallyfit". */
void tf_error_print(const tf_error *err, const char *prog, FILE *out);

/* The same for the first n messages only, without the count of the others. */
void tf_error_print_first(const tf_error *err, size_t n, const char *prog, FILE *out);

#endif
