/* Batch analysis of a survey of many populations: a work queue over the populations, each one
 * analysed on its own (tf_analysis_run) and its results written into a folder of its own as it
 * finishes, a completed marker written last so that an interrupted batch continues where it
 * stopped, and a combined summary (one row per population, failures with their reason). The
 * queue runs on threads here and over MPI ranks in batch_mpi.c; both use the same steps, so the
 * files are the same whichever runs them. Nothing here prints. */
#ifndef TF_BATCH_H
#define TF_BATCH_H

#include <signal.h>
#include <stddef.h>

#include "analysis/analysis.h"
#include "survey/survey.h"
#include "util/error.h"

/* Per-population workbooks are written when the batch has at most this many populations: each
 * holds every draw and a chart per table, so thousands of them would cost disk and time that
 * nobody spends reading them, and a few dozen are as many as anyone opens one by one; the CSV
 * tables and the summary workbook are always written. */
#define TF_BATCH_WORKBOOK_LIMIT 25

/* The files of the batch folder: each population's results in a folder of its own (named by
 * tf_path_folder_names), with its marker and its row of the table of populations; beside them the
 * settings record, the combined table of populations, the first page and the timings. */
#define TF_BATCH_MARKER "finished.txt"
#define TF_BATCH_ROW_CSV "populations.csv"
#define TF_BATCH_SETTINGS "settings.txt"
#define TF_BATCH_SUMMARY_CSV "populations.csv"
#define TF_BATCH_FIRST_PAGE_CSV "summary.csv"
#define TF_BATCH_TIMINGS_CSV "timings.csv"

typedef struct {
    /* The analysis of each population; its population field is ignored, and so is n_threads
     * (the runner gives each population its share of the threads). */
    tf_analysis_options analysis;
    const char *survey_path;     /* the survey file: hashed, named in the outputs, never written over */
    const char *title;           /* the survey's name, e.g. "scheme" */
    const char *root;            /* the batch folder, e.g. output/scheme */
    const char *workbook;        /* the summary workbook, e.g. output/scheme.xlsx */
    size_t workbook_limit;       /* per-population workbooks up to this many populations */
    int workbook_draws;          /* those workbooks hold the raw draws too (else CSV only) */
    /* More lines for the settings record (e.g. hashes of the model files the priors come
     * from); may be NULL. A run continues an earlier one only when every line is the same. */
    const char *extra_settings;
    int fresh;                   /* discard the results of an earlier run with other settings */
} tf_batch_options;

/* Where a population stands. */
typedef enum {
    TF_BATCH_PENDING = 0,   /* not analysed yet (or interrupted) */
    TF_BATCH_DONE,          /* analysed; its folder holds the tables */
    TF_BATCH_FAILED,        /* the analysis failed: every fit failed, no model suits the counts */
    TF_BATCH_BAD_DATA,      /* its rows in the survey file are invalid; it was set aside */
} tf_batch_state;

/* "not done", "done", "failed", "bad data": the words of the summary's Status column. */
const char *tf_batch_state_name(tf_batch_state s);

/* What one population's analysis left: filled by tf_batch_run_one, handed to tf_batch_record
 * (which takes row). In an MPI run it travels from a worker to rank 0 (tf_batch_result_pack). */
typedef struct {
    size_t index;           /* the population (file order) */
    tf_batch_state state;
    double seconds;         /* wall-clock time it took */
    char reason[800];       /* why it failed; "" when done */
    char *row;              /* its line of the summary CSV, without the line end (malloc'd) */
} tf_batch_result;

void tf_batch_result_clear(tf_batch_result *res);   /* frees row; accepts a zeroed result */

/* The result as bytes and back, for sending between processes. pack: *out malloc'd (caller
 * frees); TF_ERR_NOMEM. unpack: TF_ERR_INVALID for bytes that are not a packed result. */
tf_status tf_batch_result_pack(const tf_batch_result *res, char **out, size_t *len, tf_error *err);
tf_status tf_batch_result_unpack(const char *data, size_t len, tf_batch_result *res, tf_error *err);

typedef struct tf_batch tf_batch;

/* A batch over every population of sv (read with tf_survey_read_batch, so that it may hold
 * populations set aside for bad data). Borrows sv and the strings of o, which must outlive the
 * batch. Touches no file but the survey (hashed). Errors: TF_ERR_IO (the survey cannot be read),
 * TF_ERR_INVALID (no priors callback, nothing to analyse), TF_ERR_NOMEM. */
tf_status tf_batch_new(const tf_survey *sv, const tf_batch_options *o, tf_batch **out, tf_error *err);
void tf_batch_free(tf_batch *b);   /* accepts NULL */

size_t tf_batch_n_populations(const tf_batch *b);
const char *tf_batch_label(const tf_batch *b, size_t i);
/* The population's folder (root/populations/<name>); names are made safe for any file system
 * and unique, in file order. */
const char *tf_batch_folder(const tf_batch *b, size_t i);
tf_batch_state tf_batch_state_of(const tf_batch *b, size_t i);
const char *tf_batch_reason(const tf_batch *b, size_t i);
size_t tf_batch_count(const tf_batch *b, tf_batch_state s);
/* The settings record as written to root/settings.txt. */
const char *tf_batch_settings(const tf_batch *b);

/* Makes the batch folder ready: when it holds the settings record of an earlier run, the
 * settings must be the same (else TF_ERR_USAGE naming the first line that differs, unless
 * o->fresh, which removes the earlier results first), and every population whose folder holds
 * a completed marker of these settings is taken as settled (resumed). Then writes the settings
 * record and lists the populations still to do. Errors: TF_ERR_USAGE, TF_ERR_IO, TF_ERR_NOMEM. */
tf_status tf_batch_prepare(tf_batch *b, tf_error *err);
size_t tf_batch_n_resumed(const tf_batch *b);
/* The populations still to do, longest series first (the longest-processing-time rule, Graham
 * 1969, SIAM J. Appl. Math. 17:416, keeps the last workers from finishing long after the
 * others); ties in file order. */
size_t tf_batch_n_todo(const tf_batch *b);
size_t tf_batch_todo(const tf_batch *b, size_t k);

/* Analyses population i with n_threads threads for its chains and writes its folder: the CSV
 * tables (each with a first column Population, so that the same table of every population
 * concatenates under one header), summary-row.csv, a workbook when the batch is small, and last
 * the completed marker. A failed or set-aside population gets its summary row and marker too.
 * Safe to call from several threads at once for different populations; b is not changed (the
 * caller hands *res to tf_batch_record). Returns TF_OK when the population is settled (done,
 * failed or bad data: see res->state), TF_ERR_INTERRUPTED when *stop became non-zero (nothing
 * counts as done), TF_ERR_IO / TF_ERR_NOMEM when the results cannot be written (the batch
 * should stop). */
tf_status tf_batch_run_one(const tf_batch *b, size_t i, size_t n_threads, const volatile sig_atomic_t *stop,
                           tf_batch_result *res, tf_error *err);

/* Records a settled population's result; takes res->row (res is cleared). Out-of-range
 * indices are ignored. */
void tf_batch_record(tf_batch *b, tf_batch_result *res);

/* What a progress callback hears; called under the runner's lock, one call at a time. */
typedef struct {
    int finished;           /* 0: the population starts; 1: it is settled */
    size_t index;
    const char *label;
    tf_batch_state state;   /* when finished */
    const char *reason;
    double seconds;
    size_t n_settled, n_populations;
    int worker;             /* thread number or MPI rank */
} tf_batch_event;
typedef void (*tf_batch_progress_fn)(void *ctx, const tf_batch_event *e);

/* Calls the progress callback (if any) for e: for the MPI runner, which keeps its own queue. */
void tf_batch_notify(tf_batch_progress_fn fn, void *ctx, const tf_batch *b, const tf_batch_event *e);

/* Runs the populations still to do on n_workers threads, one population per thread at a time
 * (a population alone on the threads gets them all for its chains). Returns TF_OK when every
 * one is settled, TF_ERR_INTERRUPTED when *stop became non-zero (the settled ones stay), or the
 * first write error. */
tf_status tf_batch_run_threads(tf_batch *b, size_t n_workers, const volatile sig_atomic_t *stop,
                               tf_batch_progress_fn progress, void *ctx, tf_error *err);

/* Writes the combined outputs: root/all-populations.csv (the summary rows in file order under
 * one header; populations not yet done have Status "not done"), root/timings.csv (seconds per
 * population, kept apart so that the other files compare byte for byte between runs), and the
 * summary workbook (the same rows with sort and filter buttons, and a page on how the batch
 * was made). Errors: TF_ERR_IO, TF_ERR_NOMEM, TF_ERR_INTERRUPTED. */
tf_status tf_batch_write_summary(const tf_batch *b, const volatile sig_atomic_t *stop, tf_error *err);

#endif
