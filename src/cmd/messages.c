/* The commands' closing messages and analysis progress; see messages.h. */
#include "cmd/messages.h"

#include "cmd/cmd.h"

#include <stdarg.h>

int tf_messages_usage(const char *prog, const tf_error *err)
{
    /* Only the first: the checks after it often follow from it (an unknown option takes the
     * survey file for its value, and then the survey is "missing"), and one mistake should read
     * as one error. The option loops record in command-line order, so the first is the earliest. */
    tf_error_print_first(err, 1, prog, stderr);
    return TF_EXIT_USAGE;
}

int tf_messages_error(const char *prog, int code, const char *hint, const char *fmt, ...)
{
    tf_error err;
    tf_error_init(&err);
    char what[sizeof err.items[0].what];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s", what);
    tf_error_print(&err, prog, stderr);
    return code;
}

void tf_messages_outcome(const char *prog, int code, const tf_error *err, FILE *out)
{
    if (code == TF_EXIT_INTERRUPTED)
        fprintf(out, "%s: interrupted; no files written\n", prog);
    else if (code != TF_EXIT_OK)
        tf_error_print(err, prog, out);
}

tf_status tf_messages_flush(tf_error *err)
{
    if (fflush(stdout) != 0)
        return tf_error_add(err, TF_ERR_IO, NULL, 0, 0, NULL, "cannot write to standard output");
    return TF_OK;
}

void tf_messages_analysis(void *ctx, const tf_analysis_event *e)
{
    const char *label = e->label[0] ? e->label : (const char *)ctx;
    switch (e->stage) {
    case TF_ANALYSIS_STARTED:
        fprintf(stderr, "%s (%zu of %zu): fitting and comparing the models...\n", label, e->population + 1,
                e->n_populations);
        break;
    case TF_ANALYSIS_MODEL_DONE:
        fprintf(stderr, "  %s: %s %s in %.1f s\n", label, e->model, e->failed ? "failed" : "done", e->model_seconds);
        break;
    case TF_ANALYSIS_PROJECTING: fprintf(stderr, "  projecting...\n"); break;
    case TF_ANALYSIS_DONE: fprintf(stderr, "  done in %.0f s\n", e->seconds); break;
    }
}

void tf_messages_analysis_plain(void *ctx, const tf_analysis_event *e)
{
    if (e->stage != TF_ANALYSIS_MODEL_DONE)
        return;
    const char *label = e->label[0] ? e->label : (const char *)ctx;
    fprintf(stderr, "%s: %s %s in %.1f s\n", label, e->model, e->failed ? "failed" : "done", e->model_seconds);
}
