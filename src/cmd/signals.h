/* Ctrl-C and kill for the long-running commands: SIGINT and SIGTERM set one flag that the
 * chains, the importance sampler, the projection and the writers poll (their `stop` arguments),
 * and can be held back while a group of files is renamed into place. */
#ifndef TF_SIGNALS_H
#define TF_SIGNALS_H

#include <signal.h>

/* The handlers a command replaced, to put back when it ends. A small value type for the
 * caller's stack. */
typedef struct {
    struct sigaction old_int, old_term;
} tf_signals;

/* Clears the flag, then makes SIGINT and SIGTERM set it (no SA_RESTART, so a blocking call
 * returns early), keeping the handlers they had in *saved for tf_signals_restore. Returns the
 * flag (as tf_signals_flag). */
const volatile sig_atomic_t *tf_signals_catch(tf_signals *saved);

/* Puts back the handlers that tf_signals_catch kept in *saved. */
void tf_signals_restore(const tf_signals *saved);

/* The flag: non-zero once SIGINT or SIGTERM arrived after the last tf_signals_catch. */
const volatile sig_atomic_t *tf_signals_flag(void);

/* Holds SIGINT and SIGTERM back: they wait, pending, until tf_signals_release, so that a late
 * Ctrl-C cannot stop a group of renames half-way. *old receives the mask to release with. */
void tf_signals_hold(sigset_t *old);
void tf_signals_release(const sigset_t *old);

#endif
