/* The batch over MPI processes: rank 0 hands out population indices and gathers the results,
 * the other ranks analyse (batch_mpi.c, built only by `make MPI=1`). In the plain build these
 * are stand-ins for a single process, so the commands call them either way and no MPI header
 * is compiled. */
#ifndef TF_BATCH_MPI_H
#define TF_BATCH_MPI_H

#include <signal.h>

#include "batch/batch.h"
#include "util/error.h"

#ifdef TF_MPI

/* Starts MPI when the program was launched by an MPI launcher (mpirun, srun), else leaves it
 * alone: *rank = 0, *size = 1. TF_ERR_IO when MPI cannot start. */
tf_status tf_batch_mpi_start(int *argc, char ***argv, int *rank, int *size, tf_error *err);
/* Ends MPI if it was started. */
void tf_batch_mpi_end(void);
/* Rank 0's value, on every rank (a broadcast); value itself when size is 1. */
int tf_batch_mpi_share(int value, int size);
/* The largest value over all ranks (an all-reduce); value itself when size is 1. */
int tf_batch_mpi_max(int value, int size);
/* The manager/worker queue: rank 0 hands out the populations still to do (b prepared on rank
 * 0; the workers need only tf_batch_new) one at a time to whichever worker asks, and records
 * each result; workers analyse with n_threads threads each and write the population's folder
 * (the output folder must be shared between the machines). progress is called on rank 0.
 * Returns on rank 0 as tf_batch_run_threads does; on a worker TF_OK, or its write error. */
tf_status tf_batch_run_mpi(tf_batch *b, int rank, int size, size_t n_threads, const volatile sig_atomic_t *stop,
                           tf_batch_progress_fn progress, void *ctx, tf_error *err);

#else

static inline tf_status tf_batch_mpi_start(int *argc, char ***argv, int *rank, int *size, tf_error *err)
{
    (void)argc, (void)argv, (void)err;
    *rank = 0;
    *size = 1;
    return TF_OK;
}
static inline void tf_batch_mpi_end(void) {}
static inline int tf_batch_mpi_share(int value, int size)
{
    (void)size;
    return value;
}
static inline int tf_batch_mpi_max(int value, int size)
{
    (void)size;
    return value;
}
static inline tf_status tf_batch_run_mpi(tf_batch *b, int rank, int size, size_t n_threads,
                                         const volatile sig_atomic_t *stop, tf_batch_progress_fn progress, void *ctx,
                                         tf_error *err)
{
    (void)rank, (void)size;
    return tf_batch_run_threads(b, n_threads, stop, progress, ctx, err);
}

#endif

#endif
