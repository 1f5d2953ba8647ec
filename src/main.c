/* tallyfit: command dispatch only, and the conventions every command shares: `help CMD`,
 * `--version` anywhere, and one error format for a command line that names no command. */
#include <gsl/gsl_errno.h>
#include <signal.h>
#include <stdio.h>
#include <string.h>

#include "cmd/cmd.h"
#include "cmd/messages.h"
#include "util/error.h"
#include "util/version.h"

static void usage(FILE *out)
{
    fputs("usage: tallyfit COMMAND [OPTIONS] ...\n"
          "       tallyfit help [COMMAND]\n"
          "       tallyfit [COMMAND] --version\n\n"
          "Fits state-space population models to annual counts and projects the risk of decline.\n\n"
          "commands:\n",
          out);
    for (const tf_cmd *c = tf_cmd_table; c->name; c++)
        fprintf(out, "  %-12s %s\n", c->name, c->summary);
    fputs("\n'tallyfit help COMMAND' and 'tallyfit COMMAND --help' show a command's options.\n" TF_CMD_EXIT_HELP,
          out);
}

static int version(void)
{
    printf("tallyfit %s\n%s\n", TF_VERSION, TF_CMD_LICENCE);
    return TF_EXIT_OK;
}

static const tf_cmd *find(const char *name)
{
    for (const tf_cmd *c = tf_cmd_table; c->name; c++)
        if (!strcmp(name, c->name))
            return c;
    return NULL;
}

/* A refused top-level command line, in the format of every command's errors (messages.h). */
static int refuse(const char *hint, const char *what, const char *arg)
{
    tf_error err;
    tf_error_init(&err);
    tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, hint, "%s '%s'", what, arg);
    return tf_messages_usage("tallyfit", &err);
}

static int unknown_command(const char *name)
{
    return refuse("run 'tallyfit help' for the list of commands", "unknown command", name);
}

/* Whether a command's arguments ask for the version: "--version" before any "--help" (GNU
 * getopt would act on whichever comes first the same way) and before a "--" that ends the
 * options. A "--version" given as the value of an option that takes one (`-o --version`) is
 * read as the request too: a folder of that name is not worth the ambiguity. */
static int asks_version(int argc, char **argv)
{
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--"))
            return 0;
        if (!strcmp(argv[i], "--help") || !strcmp(argv[i], "-h"))
            return 0;
        if (!strcmp(argv[i], "--version"))
            return 1;
    }
    return 0;
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
        tf_error err;
        tf_error_init(&err);
        tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "run 'tallyfit help' for the list of commands",
                     "no command given");
        return tf_messages_usage("tallyfit", &err);
    }
    const char *name = argv[1];
    if (!strcmp(name, "--help") || !strcmp(name, "-h")) {
        usage(stdout);
        return TF_EXIT_OK;
    }
    if (!strcmp(name, "--version") || !strcmp(name, "-V"))
        return version();
    if (!strcmp(name, "help")) {
        if (argc < 3) {
            usage(stdout);
            return TF_EXIT_OK;
        }
        if (argc > 3)
            return refuse("'tallyfit help COMMAND' shows one command's help", "unexpected argument", argv[3]);
        const tf_cmd *c = find(argv[2]);
        if (!c)
            return unknown_command(argv[2]);
        /* The command's own --help, so that both ways show the same text. */
        char *args[] = {argv[2], "--help", NULL};
        return c->run(2, args);
    }
    if (name[0] == '-')
        return refuse("options follow the command: tallyfit COMMAND [OPTIONS]; run 'tallyfit help'",
                      "unknown option", name);
    const tf_cmd *c = find(name);
    if (!c)
        return unknown_command(name);
    if (asks_version(argc - 1, argv + 1))
        return version();
    return c->run(argc - 1, argv + 1);
}
