/* tallyfit: command dispatch only. */
#include <gsl/gsl_errno.h>
#include <signal.h>
#include <stdio.h>
#include <string.h>

#include "cmd/cmd.h"
#include "util/version.h"

static void usage(FILE *out)
{
    fputs("usage: tallyfit COMMAND [OPTIONS] ...\n"
          "       tallyfit COMMAND --help\n"
          "       tallyfit --version\n\n"
          "Fits state-space population models to annual counts and projects the risk of decline.\n\n"
          "commands:\n",
          out);
    for (const tf_cmd *c = tf_cmd_table; c->name; c++)
        fprintf(out, "  %-12s %s\n", c->name, c->summary);
}

int main(int argc, char **argv)
{
    /* GSL aborts on errors by default; every GSL call's status is checked instead. */
    gsl_set_error_handler_off();
    /* A write past the file size limit (ulimit -f) would otherwise kill the process with
     * SIGXFSZ before the atomic writer can remove its temporary; ignored, the write fails with
     * EFBIG and is reported like a full disk (POSIX.1-2008, write: [EFBIG]). */
    struct sigaction ignore = {.sa_handler = SIG_IGN};
    sigemptyset(&ignore.sa_mask);
    sigaction(SIGXFSZ, &ignore, NULL);

    if (argc < 2) {
        usage(stderr);
        return TF_EXIT_USAGE;
    }
    const char *name = argv[1];
    if (!strcmp(name, "--help") || !strcmp(name, "-h") || !strcmp(name, "help")) {
        usage(stdout);
        return TF_EXIT_OK;
    }
    if (!strcmp(name, "--version") || !strcmp(name, "-V")) {
        printf("tallyfit %s\n", TF_VERSION);
        return TF_EXIT_OK;
    }
    for (const tf_cmd *c = tf_cmd_table; c->name; c++)
        if (!strcmp(name, c->name))
            return c->run(argc - 1, argv + 1);
    fprintf(stderr, "tallyfit: unknown command '%s'\n  hint: run 'tallyfit --help' for the list of commands\n",
            name);
    return TF_EXIT_USAGE;
}
