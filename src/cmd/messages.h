/* What the commands print on standard error besides their warnings: the errors that ended a
 * command, the notice of an interruption, and the progress of an analysis. */
#ifndef TF_MESSAGES_H
#define TF_MESSAGES_H

#include <stdio.h>

#include "analysis/analysis.h"
#include "util/error.h"

/* Every error a command reports goes through tf_error_print (util/error.h), in the one format
 * "tallyfit CMD: error: ..." plus an optional "  hint: ..." line. */

/* A command line refused before any work: prints the first message of err on stderr (one
 * mistake, one error) and returns TF_EXIT_USAGE. */
int tf_messages_usage(const char *prog, const tf_error *err);

/* One error made on the spot (printf-style fmt; hint may be NULL), printed on stderr in the same
 * format; returns code, so that a command can write `return tf_messages_error(...)`. */
int tf_messages_error(const char *prog, int code, const char *hint, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

/* How a command that writes files ended, on out: for TF_EXIT_INTERRUPTED the notice that
 * nothing was written, for any other code but TF_EXIT_OK the messages of err. */
void tf_messages_outcome(const char *prog, int code, const tf_error *err, FILE *out);

/* Flushes standard output at the end of a command's results: TF_ERR_IO ("cannot write to standard
 * output") when they could not all be written. */
tf_status tf_messages_flush(tf_error *err);

/* A progress callback of tf_analysis_run (analysis.h) for a terminal: one line per population
 * started, model done, projection and population done. ctx is the survey's name (const char *),
 * shown for a population without a label. */
void tf_messages_analysis(void *ctx, const tf_analysis_event *e);

/* The same for standard error redirected to a file or a pipe: one plain line per finished model
 * ("label: model done in 3.2 s"), so that a log of a long run shows where the time went. */
void tf_messages_analysis_plain(void *ctx, const tf_analysis_event *e);

#endif
