/* The batch over MPI processes: a manager/worker queue (rank 0 hands out population indices one
 * at a time to whichever worker asks and gathers the results; see batch_mpi.h). Built only by
 * `make MPI=1`, with mpicc; the plain build leaves this file out. */
#include "batch/batch_mpi.h"

#include <mpi.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* Whether this process started MPI. Process-wide on purpose: MPI itself is one per process, and
 * this is set once, before any thread runs. */
static int mpi_on;

enum { TAG_ASK = 1, TAG_WORK, TAG_STOP };

/* The first byte of a worker's message says what follows: nothing yet (its first request), a
 * settled population (a packed result), an interrupted one, or an error that stops the batch. */
enum { MSG_READY = 'A', MSG_RESULT = 'R', MSG_INTERRUPTED = 'I', MSG_ERROR = 'E' };

tf_status tf_batch_mpi_start(int *argc, char ***argv, int *rank, int *size, tf_error *err)
{
    *rank = 0;
    *size = 1;
    /* Launchers say so in the environment: Open MPI's mpirun, and PMI / PMIx as srun and other
     * launchers set them. Without one the program runs as a plain single process. */
    if (!getenv("OMPI_COMM_WORLD_SIZE") && !getenv("PMIX_RANK") && !getenv("PMI_RANK") && !getenv("PMI_SIZE"))
        return TF_OK;
    int provided = 0;
    /* The chains of a fit may run on threads, but only the main thread calls MPI. */
    if (MPI_Init_thread(argc, argv, MPI_THREAD_FUNNELED, &provided) != MPI_SUCCESS)
        return tf_error_add(err, TF_ERR_IO, NULL, 0, 0, "check the MPI installation and the launcher",
                            "MPI could not start");
    mpi_on = 1;
    MPI_Comm_rank(MPI_COMM_WORLD, rank);
    MPI_Comm_size(MPI_COMM_WORLD, size);
    return TF_OK;
}

void tf_batch_mpi_end(void)
{
    if (mpi_on)
        MPI_Finalize();
    mpi_on = 0;
}

int tf_batch_mpi_share(int value, int size)
{
    if (mpi_on && size > 1)
        MPI_Bcast(&value, 1, MPI_INT, 0, MPI_COMM_WORLD);
    return value;
}

int tf_batch_mpi_max(int value, int size)
{
    int out = value;
    if (mpi_on && size > 1)
        MPI_Allreduce(&value, &out, 1, MPI_INT, MPI_MAX, MPI_COMM_WORLD);
    return out;
}

/* ---- the worker ---- */

static int send_message(char kind, const char *data, size_t len)
{
    char *buf = malloc(len + 1);
    if (!buf)
        return -1;
    buf[0] = kind;
    if (len)
        memcpy(buf + 1, data, len);
    int rc = MPI_Send(buf, (int)(len + 1), MPI_CHAR, 0, TAG_ASK, MPI_COMM_WORLD);
    free(buf);
    return rc == MPI_SUCCESS ? 0 : -1;
}

static tf_status worker(tf_batch *b, size_t n_threads, const volatile sig_atomic_t *stop, tf_error *err)
{
    if (send_message(MSG_READY, NULL, 0))
        return tf_error_add(err, TF_ERR_IO, NULL, 0, 0, NULL, "MPI: cannot reach rank 0");
    tf_status result = TF_OK;
    for (;;) {
        uint64_t index = 0;
        MPI_Status ms;
        if (MPI_Recv(&index, 1, MPI_UINT64_T, 0, MPI_ANY_TAG, MPI_COMM_WORLD, &ms) != MPI_SUCCESS)
            return tf_error_add(err, TF_ERR_IO, NULL, 0, 0, NULL, "MPI: lost rank 0");
        if (ms.MPI_TAG == TAG_STOP)
            return result;
        tf_batch_result res;
        tf_error mine;
        tf_error_init(&mine);
        tf_status st = tf_batch_run_one(b, (size_t)index, n_threads, stop, &res, &mine);
        int rc;
        if (st == TF_OK) {
            char *packed = NULL;
            size_t len = 0;
            st = tf_batch_result_pack(&res, &packed, &len, &mine);
            tf_batch_result_clear(&res);
            rc = st == TF_OK ? send_message(MSG_RESULT, packed, len) : -1;
            free(packed);
        } else if (st == TF_ERR_INTERRUPTED) {
            char text[32];
            int n = snprintf(text, sizeof text, "%llu", (unsigned long long)index);
            rc = send_message(MSG_INTERRUPTED, text, (size_t)n);
        } else {
            /* Rank 0 prints: the message goes there as "status<TAB>file<TAB>what". */
            char text[1024];
            const tf_error_item *e = &mine.items[0];
            int n = snprintf(text, sizeof text, "%d\t%s\t%s", (int)st, e->file, e->what);
            rc = send_message(MSG_ERROR, text, n > 0 && (size_t)n < sizeof text ? (size_t)n : sizeof text - 1);
            result = st;
        }
        if (rc)
            return tf_error_add(err, TF_ERR_IO, NULL, 0, 0, NULL, "MPI: cannot reach rank 0");
    }
}

/* ---- the manager ---- */

static tf_status manager(tf_batch *b, int size, const volatile sig_atomic_t *stop, tf_batch_progress_fn progress,
                         void *ctx, tf_error *err)
{
    size_t next = 0, n = tf_batch_n_populations(b), n_settled = n - tf_batch_n_todo(b);
    int active = size - 1, stopping = 0;
    tf_status fatal = TF_OK;
    const struct timespec nap = {0, 2000000};
    while (active > 0) {
        /* Polling with a short sleep instead of a blocking receive, which in Open MPI spins on a
         * core: the manager would take a core from the workers. */
        int ready = 0;
        MPI_Status ms;
        MPI_Iprobe(MPI_ANY_SOURCE, TAG_ASK, MPI_COMM_WORLD, &ready, &ms);
        if (!ready) {
            nanosleep(&nap, NULL);
            continue;
        }
        int len = 0;
        MPI_Get_count(&ms, MPI_CHAR, &len);
        char *buf = malloc(len > 0 ? (size_t)len + 1 : 1);
        if (!buf) {
            /* Take the message off the queue all the same, and stop the batch. */
            char dummy[1];
            MPI_Recv(dummy, 0, MPI_CHAR, ms.MPI_SOURCE, TAG_ASK, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
            if (fatal == TF_OK)
                fatal = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
            MPI_Send(NULL, 0, MPI_UINT64_T, ms.MPI_SOURCE, TAG_STOP, MPI_COMM_WORLD);
            active--;
            continue;
        }
        MPI_Recv(buf, len, MPI_CHAR, ms.MPI_SOURCE, TAG_ASK, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
        buf[len > 0 ? len : 0] = '\0';
        char kind = len > 0 ? buf[0] : MSG_READY;
        if (kind == MSG_RESULT) {
            tf_batch_result res;
            if (tf_batch_result_unpack(buf + 1, (size_t)len - 1, &res, err) != TF_OK) {
                if (fatal == TF_OK)
                    fatal = TF_ERR_INVALID;
            } else {
                n_settled++;
                tf_batch_event e = {.finished = 1, .index = res.index, .state = res.state, .reason = res.reason,
                                    .seconds = res.seconds, .n_settled = n_settled, .n_populations = n,
                                    .worker = ms.MPI_SOURCE};
                e.label = res.index < n ? tf_batch_label(b, res.index) : "";
                tf_batch_record(b, &res);
                tf_batch_notify(progress, ctx, b, &e);
                tf_batch_result_clear(&res);
            }
        } else if (kind == MSG_INTERRUPTED) {
            stopping = 1;
        } else if (kind == MSG_ERROR) {
            char *file = strchr(buf + 1, '\t'), *what = file ? strchr(file + 1, '\t') : NULL;
            if (fatal == TF_OK && what) {
                *file++ = '\0';
                *what++ = '\0';
                fatal = tf_error_add(err, (tf_status)atoi(buf + 1), file[0] ? file : NULL, 0, 0, NULL,
                                     "rank %d: %s", ms.MPI_SOURCE, what);
            } else if (fatal == TF_OK) {
                fatal = tf_error_add(err, TF_ERR_IO, NULL, 0, 0, NULL, "rank %d failed", ms.MPI_SOURCE);
            }
        }
        free(buf);
        if (!stopping && fatal == TF_OK && !(stop && *stop) && next < tf_batch_n_todo(b)) {
            uint64_t index = tf_batch_todo(b, next++);
            tf_batch_event e = {.index = (size_t)index, .label = tf_batch_label(b, (size_t)index),
                                .n_settled = n_settled, .n_populations = n, .worker = ms.MPI_SOURCE};
            tf_batch_notify(progress, ctx, b, &e);
            MPI_Send(&index, 1, MPI_UINT64_T, ms.MPI_SOURCE, TAG_WORK, MPI_COMM_WORLD);
        } else {
            MPI_Send(NULL, 0, MPI_UINT64_T, ms.MPI_SOURCE, TAG_STOP, MPI_COMM_WORLD);
            active--;
        }
    }
    if (fatal != TF_OK)
        return fatal;
    if (tf_batch_count(b, TF_BATCH_PENDING))
        return tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted");
    return TF_OK;
}

tf_status tf_batch_run_mpi(tf_batch *b, int rank, int size, size_t n_threads, const volatile sig_atomic_t *stop,
                           tf_batch_progress_fn progress, void *ctx, tf_error *err)
{
    if (!mpi_on || size < 2)
        return tf_batch_run_threads(b, n_threads, stop, progress, ctx, err);
    return rank == 0 ? manager(b, size, stop, progress, ctx, err) : worker(b, n_threads, stop, err);
}
