/* The commands' SIGINT / SIGTERM flag; see signals.h. */
#include "cmd/signals.h"

#include <string.h>

/* The one piece of global mutable state in the program: a signal handler has no other way to
 * reach the running code, and C11 7.14.1.1 allows it exactly this, writing a volatile
 * sig_atomic_t. One command runs at a time, so one flag serves them all. */
static volatile sig_atomic_t interrupted;

static void on_signal(int sig)
{
    (void)sig;
    interrupted = 1;
}

const volatile sig_atomic_t *tf_signals_catch(tf_signals *saved)
{
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    interrupted = 0;
    sigaction(SIGINT, &sa, &saved->old_int);
    sigaction(SIGTERM, &sa, &saved->old_term);
    return &interrupted;
}

void tf_signals_restore(const tf_signals *saved)
{
    sigaction(SIGINT, &saved->old_int, NULL);
    sigaction(SIGTERM, &saved->old_term, NULL);
}

const volatile sig_atomic_t *tf_signals_flag(void) { return &interrupted; }

void tf_signals_hold(sigset_t *old)
{
    sigset_t block;
    sigemptyset(&block);
    sigaddset(&block, SIGINT);
    sigaddset(&block, SIGTERM);
    sigprocmask(SIG_BLOCK, &block, old);
}

void tf_signals_release(const sigset_t *old) { sigprocmask(SIG_SETMASK, old, NULL); }
