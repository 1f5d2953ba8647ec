/* Unit tests for the commands' shared option helpers. */
#include "tf_test.h"
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "cmd/args.h"
#include "util/path.h"
#include "cmd/cmd.h"

static const char *first_what(const tf_error *err) { return err->n_items ? err->items[0].what : ""; }

/* One mapping from status to exit code for every command (cmd.h and the exit-status list of
 * every help): the codes are the interface scripts test, so each status is pinned here. */
START_TEST(exit_codes_one_mapping)
{
    ck_assert_int_eq(tf_args_exit_code(TF_OK), TF_EXIT_OK);
    ck_assert_int_eq(tf_args_exit_code(TF_ERR_USAGE), TF_EXIT_USAGE);
    ck_assert_int_eq(tf_args_exit_code(TF_ERR_UNSUPPORTED), TF_EXIT_USAGE);
    ck_assert_int_eq(tf_args_exit_code(TF_ERR_INVALID), TF_EXIT_INPUT);
    ck_assert_int_eq(tf_args_exit_code(TF_ERR_INTERRUPTED), TF_EXIT_INTERRUPTED);
    ck_assert_int_eq(tf_args_exit_code(TF_ERR_NUMERIC), TF_EXIT_FAIL);
    ck_assert_int_eq(tf_args_exit_code(TF_ERR_NOMEM), TF_EXIT_FAIL);
    ck_assert_int_eq(tf_args_exit_code(TF_ERR_IO), TF_EXIT_FAIL);
}
END_TEST

START_TEST(pairs_parse_and_accumulate)
{
    tf_arg_pairs p;
    tf_args_pairs_init(&p);
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_args_parse_pairs("--parameter", "r=0.5, K = 1e3 ,sigma=.1", &p, &err), TF_OK);
    ck_assert_int_eq(tf_args_parse_pairs("--parameter", "phi=-2", &p, &err), TF_OK);
    ck_assert_uint_eq(p.n, 4);
    ck_assert_str_eq(p.items[1].name, "K");
    ck_assert_double_eq(p.items[1].value, 1000.0);
    ck_assert_double_eq(tf_args_pairs_get(&p, "sigma")->value, 0.1);
    ck_assert_double_eq(tf_args_pairs_get(&p, "phi")->value, -2.0);
    ck_assert_ptr_null(tf_args_pairs_get(&p, "tau"));

    static const struct {
        const char *text, *phrase;
    } bad[] = {
        {"r=1,,K=2", "empty item"}, {"r", "no '=value'"}, {"=3", "has no name"}, {"r=abc", "not a finite number"},
        {"r=inf", "not a finite number"}, {"r=1e999", "not a finite number"}, {"r=1x", "not a finite number"},
        {"r=1,r=2", "given twice"}, {"", "empty item"}, {"abcdefghijklmnopqrstuvwxyz0123456789=1", "too long"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        tf_args_pairs_init(&p);
        tf_error_init(&err);
        ck_assert_int_eq(tf_args_parse_pairs("--parameter", bad[i].text, &p, &err), TF_ERR_USAGE);
        ck_assert_msg(strstr(first_what(&err), bad[i].phrase), "'%s': %s", bad[i].text, first_what(&err));
        ck_assert_ptr_nonnull(strstr(first_what(&err), "--parameter"));
    }
    /* The table is bounded. */
    tf_args_pairs_init(&p);
    char name[16];
    tf_status st = TF_OK;
    for (int i = 0; i <= TF_ARGS_MAX_PAIRS && st == TF_OK; i++) {
        snprintf(name, sizeof name, "p%d=1", i);
        st = tf_args_parse_pairs("--parameter", name, &p, &err);
    }
    ck_assert_int_eq(st, TF_ERR_USAGE);
    ck_assert_uint_eq(p.n, TF_ARGS_MAX_PAIRS);
}
END_TEST

START_TEST(numbers_lists_and_seeds)
{
    tf_error err;
    tf_error_init(&err);
    double v[4];
    size_t n;
    ck_assert_int_eq(tf_args_parse_doubles("--effort", "1,2.5, 3", v, 4, &n, &err), TF_OK);
    ck_assert_uint_eq(n, 3);
    ck_assert_double_eq(v[1], 2.5);
    ck_assert_int_eq(tf_args_parse_doubles("--effort", "1,2,3,4,5", v, 4, &n, &err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_args_parse_doubles("--effort", "1,,2", v, 4, &n, &err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_args_parse_doubles("--effort", "1,x", v, 4, &n, &err), TF_ERR_USAGE);

    size_t z;
    ck_assert_int_eq(tf_args_parse_size("--particles", "250", 1, 1000, &z, &err), TF_OK);
    ck_assert_uint_eq(z, 250);
    ck_assert_int_eq(tf_args_parse_size("--particles", "0", 1, 1000, &z, &err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_args_parse_size("--particles", "-3", 1, 1000, &z, &err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_args_parse_size("--particles", "2.5", 1, 1000, &z, &err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_args_parse_size("--particles", "99999999999999999999999", 1, 1000, &z, &err), TF_ERR_USAGE);

    long l;
    ck_assert_int_eq(tf_args_parse_long("--first-year", "-5", -10, 10, &l, &err), TF_OK);
    ck_assert_int_eq(l, -5);
    ck_assert_int_eq(tf_args_parse_long("--first-year", "11", -10, 10, &l, &err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_args_parse_long("--first-year", "", -10, 10, &l, &err), TF_ERR_USAGE);

    uint64_t s;
    ck_assert_int_eq(tf_args_parse_seed("--seed", "18446744073709551615", &s, &err), TF_OK);
    ck_assert(s == UINT64_MAX);
    ck_assert_int_eq(tf_args_parse_seed("--seed", "18446744073709551616", &s, &err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_args_parse_seed("--seed", "-1", &s, &err), TF_ERR_USAGE);

    double d;
    ck_assert_int_eq(tf_args_parse_double("--start", " 12.5 ", &d, &err), TF_OK);
    ck_assert_double_eq(d, 12.5);
    ck_assert_int_eq(tf_args_parse_double("--start", "nan", &d, &err), TF_ERR_USAGE);

    tf_error_init(&err);
    ck_assert_int_eq(tf_args_getopt_error("simulate", '?', 0, "--bogus", &err), TF_ERR_USAGE);
    ck_assert_str_eq(first_what(&err), "unknown option '--bogus'");
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "tallyfit simulate --help"));
    ck_assert_int_eq(tf_args_getopt_error("simulate", ':', 'o', "-o", &err), TF_ERR_USAGE);
    ck_assert_str_eq(err.items[1].what, "option '-o' needs a value");
}
END_TEST

START_TEST(parameter_binds_to_the_model)
{
    tf_model *m = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_new("ricker", "negbin", &m, &err), TF_OK);
    tf_arg_pairs p;
    tf_args_pairs_init(&p);
    double theta[TF_MAX_PARAMS] = {0};
    unsigned char given[TF_MAX_PARAMS];
    ck_assert_int_eq(tf_args_parse_pairs("--parameter", "phi=4,r=0.5,K=300,sigma=0.2,x1_sd=0.3", &p, &err), TF_OK);
    ck_assert_int_eq(tf_args_bind_model(m, &p, 1, theta, given, &err), TF_OK);
    ck_assert_double_eq(theta[0], 0.5);
    ck_assert_double_eq(theta[1], 300);
    ck_assert_double_eq(theta[2], 0.2);
    ck_assert_double_eq(theta[3], 4);
    ck_assert_double_eq(tf_model_x1_sd(m), 0.3);
    ck_assert_double_eq(tf_model_x1_mean(m), 0.0); /* not given: kept */

    /* Partial binding for commands that fix only some parameters. */
    tf_args_pairs_init(&p);
    tf_args_parse_pairs("--parameter", "K=900", &p, &err);
    ck_assert_int_eq(tf_args_bind_model(m, &p, 0, theta, given, &err), TF_OK);
    ck_assert_double_eq(theta[1], 900);
    ck_assert_double_eq(theta[0], 0.5);
    ck_assert(given[1] && !given[0] && !given[2] && !given[3]);

    /* Errors: missing (with require_all), unknown (hint lists the names), out of range. */
    tf_error_init(&err);
    ck_assert_int_eq(tf_args_bind_model(m, &p, 1, theta, NULL, &err), TF_ERR_USAGE);
    ck_assert_uint_eq(err.n_items, 3); /* r, sigma, phi */
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "value of r is missing"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "r=...,K=...,sigma=...,phi=..."));
    tf_args_pairs_init(&p);
    tf_args_parse_pairs("--parameter", "tau=1,K=-1,x1_sd=-2", &p, &err);
    tf_error_init(&err);
    ck_assert_int_eq(tf_args_bind_model(m, &p, 0, theta, NULL, &err), TF_ERR_USAGE);
    ck_assert_uint_eq(err.n_items, 3);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "tau is not a parameter of model ricker+negbin"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "r, K, sigma, phi"));
    ck_assert_ptr_nonnull(strstr(err.items[1].what, "K = -1 is outside its range"));
    ck_assert_ptr_nonnull(strstr(err.items[2].what, "x1_sd = -2 is not > 0"));
    ck_assert_double_eq(theta[1], 900); /* untouched on error */
    ck_assert_double_eq(tf_model_x1_sd(m), 0.3);
    tf_model_free(m);
}
END_TEST

/* Output names: common practice for portable file names (POSIX portable filename character set,
 * letters, digits, '.', '_' and '-'), no source beyond that. */
START_TEST(output_names_are_portable)
{
    char buf[64];
    tf_path_safe_name("north valley/2", buf, sizeof buf);
    ck_assert_str_eq(buf, "north_valley_2");
    tf_path_safe_name(".hidden", buf, sizeof buf);
    ck_assert_str_eq(buf, "_hidden");
    tf_path_safe_name("", buf, sizeof buf);
    ck_assert_str_eq(buf, "_");
    tf_path_safe_name("abcdef", buf, 4);
    ck_assert_str_eq(buf, "abc");
    tf_args_survey_name("surveys/heron-colony.CSV", buf, sizeof buf);
    ck_assert_str_eq(buf, "heron-colony");
    tf_args_survey_name("-", buf, sizeof buf);
    ck_assert_str_eq(buf, "stdin");
    tf_args_survey_name("dir/.csv", buf, sizeof buf);
    ck_assert_str_eq(buf, ".csv");
    tf_args_survey_name("dir/", buf, sizeof buf);
    ck_assert_str_eq(buf, "survey");
}
END_TEST

START_TEST(names_split)
{
    tf_error err;
    tf_error_init(&err);
    char buf[32];
    const char *names[3];
    size_t n;
    ck_assert_int_eq(tf_args_split_names("--model", " ricker , gompertz,exponential", buf, sizeof buf, names, 3, &n,
                                         &err), TF_OK);
    ck_assert_uint_eq(n, 3);
    ck_assert_str_eq(names[0], "ricker");
    ck_assert_str_eq(names[1], "gompertz");
    ck_assert_str_eq(names[2], "exponential");
    ck_assert_int_eq(tf_args_split_names("--model", "ricker", buf, sizeof buf, names, 3, &n, &err), TF_OK);
    ck_assert_uint_eq(n, 1);
    ck_assert_str_eq(names[0], "ricker");
    static const struct {
        const char *text, *phrase;
    } bad[] = {
        {"ricker,,gompertz", "empty name"}, {"", "empty name"}, {"ricker, ", "empty name"},
        {"a,b,c,d", "more than 3"}, {"abcdefghijklmnopqrstuvwxyz0123456789", "longer than 31"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        tf_error_init(&err);
        ck_assert_int_eq(tf_args_split_names("--obs", bad[i].text, buf, sizeof buf, names, 3, &n, &err), TF_ERR_USAGE);
        ck_assert_msg(strstr(first_what(&err), bad[i].phrase), "'%s': %s", bad[i].text, first_what(&err));
        ck_assert_ptr_nonnull(strstr(first_what(&err), "--obs"));
    }
}
END_TEST

/* --model / --obs lists: "all", known names, and an unknown name refused with the known ones. */
START_TEST(model_names_known_or_all)
{
    tf_error err;
    tf_error_init(&err);
    char buf[64];
    const char *names[4];
    size_t n = 9;
    int all = 0;
    ck_assert_int_eq(tf_args_model_names("--model", "all", buf, sizeof buf, names, 4, &n, &all, 1, &err), TF_OK);
    ck_assert(all && n == 0);
    ck_assert_int_eq(tf_args_model_names("--model", "ricker, gompertz", buf, sizeof buf, names, 4, &n, &all, 1, &err),
                     TF_OK);
    ck_assert(!all && n == 2);
    ck_assert_str_eq(names[1], "gompertz");
    ck_assert_int_eq(tf_args_model_names("--obs", "poisson,negbin", buf, sizeof buf, names, 4, &n, &all, 0, &err), TF_OK);
    ck_assert_uint_eq(n, 2);
    /* A growth model is not a counting-error model. */
    ck_assert_int_eq(tf_args_model_names("--obs", "poisson,ricker", buf, sizeof buf, names, 4, &n, &all, 0, &err),
                     TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(first_what(&err), "--obs: unknown model 'ricker'"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "negbin"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_args_model_names("--model", "ricker,,gompertz", buf, sizeof buf, names, 4, &n, &all, 1, &err),
                     TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(first_what(&err), "empty name"));
}
END_TEST

/* The survey operand, the kept draws and the output folder of a population. */
START_TEST(operand_draws_and_folders)
{
    tf_error err;
    tf_error_init(&err);
    char *argv[] = {"fit", "a.csv", "b.csv", NULL};
    ck_assert_ptr_null(tf_args_survey_path(1, argv, 1, &err));
    ck_assert_str_eq(tf_args_survey_path(2, argv, 1, &err), "a.csv");
    ck_assert_uint_eq(err.n_items, 0);
    ck_assert_str_eq(tf_args_survey_path(3, argv, 1, &err), "a.csv");
    ck_assert_ptr_nonnull(strstr(first_what(&err), "unexpected argument 'b.csv'"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_args_no_survey("fit", &err), TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "tallyfit fit --help"));

    /* The run-length options: --iterations fixes the length, the others move the bounds. */
    tf_pmmh_options po = tf_pmmh_default_options();
    tf_args_run run;
    tf_args_run_init(&run);
    tf_error_init(&err);
    ck_assert_str_eq(tf_args_run_option(TF_ARGS_OPT_ITER, "10", &run, &err), "--iterations");
    ck_assert_str_eq(tf_args_run_option(TF_ARGS_OPT_THIN, "4", &run, &err), "--thin");
    ck_assert_ptr_null(tf_args_run_option(TF_ARGS_OPT_ITER - 1, "4", &run, &err));
    ck_assert_int_eq(tf_args_run_apply(&run, &po, &err), TF_OK);
    ck_assert_uint_eq(po.min_iter, 10);
    ck_assert_uint_eq(po.max_iter, 10);
    ck_assert_uint_eq(po.thin, 4);
    tf_args_run_init(&run);
    po = tf_pmmh_default_options();
    tf_args_run_option(TF_ARGS_OPT_ITER, "3", &run, &err);
    tf_args_run_option(TF_ARGS_OPT_THIN, "4", &run, &err);
    ck_assert_int_eq(tf_args_run_apply(&run, &po, &err), TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(first_what(&err), "--thin 4 with runs of 3 iterations keeps no draw"));
    /* A maximum alone below the default minimum lowers it; --min-ess and --kept-draws apply. */
    tf_args_run_init(&run);
    po = tf_pmmh_default_options();
    tf_error_init(&err);
    tf_args_run_option(TF_ARGS_OPT_MAX_ITER, "500", &run, &err);
    tf_args_run_option(TF_ARGS_OPT_MIN_ESS, "250", &run, &err);
    tf_args_run_option(TF_ARGS_OPT_KEPT, "64", &run, &err);
    ck_assert_int_eq(tf_args_run_apply(&run, &po, &err), TF_OK);
    ck_assert_uint_eq(po.min_iter, 500);
    ck_assert_uint_eq(po.max_iter, 500);
    ck_assert_double_eq(po.min_ess, 250);
    ck_assert_uint_eq(po.max_kept, 64);
    /* Refused: --iterations with a bound, a minimum above the maximum, bad values. */
    tf_args_run_init(&run);
    tf_args_run_option(TF_ARGS_OPT_ITER, "1000", &run, &err);
    tf_args_run_option(TF_ARGS_OPT_MIN_ITER, "100", &run, &err);
    ck_assert_int_eq(tf_args_run_apply(&run, &po, &err), TF_ERR_USAGE);
    tf_args_run_init(&run);
    tf_error_init(&err);
    tf_args_run_option(TF_ARGS_OPT_MIN_ITER, "1000", &run, &err);
    tf_args_run_option(TF_ARGS_OPT_MAX_ITER, "100", &run, &err);
    ck_assert_int_eq(tf_args_run_apply(&run, &po, &err), TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(first_what(&err), "--min-iterations 1000 is above --max-iterations 100"));
    tf_error_init(&err);
    tf_args_run_option(TF_ARGS_OPT_MIN_ESS, "0", &run, &err);
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_USAGE);
    tf_error_init(&err);
    tf_args_run_option(TF_ARGS_OPT_KEPT, "7", &run, &err);
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_USAGE);
    /* --delayed-acceptance on|off, and nothing else. */
    tf_args_run_init(&run);
    tf_error_init(&err);
    po = tf_pmmh_default_options();
    ck_assert_str_eq(tf_args_run_option(TF_ARGS_OPT_DELAYED, "on", &run, &err), "--delayed-acceptance");
    ck_assert_int_eq(tf_args_run_apply(&run, &po, &err), TF_OK);
    ck_assert_int_eq(po.delayed, 1);
    tf_args_run_option(TF_ARGS_OPT_DELAYED, "off", &run, &err);
    ck_assert_int_eq(tf_args_run_apply(&run, &po, &err), TF_OK);
    ck_assert_int_eq(po.delayed, 0);
    tf_args_run_option(TF_ARGS_OPT_DELAYED, "yes", &run, &err);
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_USAGE);
    ck_assert_uint_ge(tf_args_default_threads(SIZE_MAX), 1);
    ck_assert_uint_eq(tf_args_default_threads(1), 1);

    char dir[32];
    tf_error_init(&err);
    ck_assert_int_eq(tf_args_output_dir(dir, sizeof dir, NULL, "heron", "east 1", 1, &err), TF_OK);
    ck_assert_str_eq(dir, "output/heron/east_1");
    ck_assert_int_eq(tf_args_output_dir(dir, sizeof dir, NULL, "heron", "east", 0, &err), TF_OK);
    ck_assert_str_eq(dir, "output/heron");
    ck_assert_int_eq(tf_args_output_dir(dir, sizeof dir, "res", "heron", "", 1, &err), TF_OK);
    ck_assert_str_eq(dir, "res/_");
    /* Too long for the buffer: refused, not cut. */
    ck_assert_int_eq(tf_args_output_dir(dir, sizeof dir, "a-folder-name-of-thirty-two-byte", "s", "x", 0, &err),
                     TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(first_what(&err), "too long"));

    /* A population's folder is the name the one folder rule gives it among the survey's
     * populations (util/path.h), in every command. */
    tf_survey *sv = NULL;
    tf_error_init(&err);
    ck_assert_int_eq(tf_args_read_survey(TF_TEST_DATA("good/multi-pop.csv"), &sv, &err), TF_OK);
    char folder[64];
    tf_args_folders fs, none;
    ck_assert_int_eq(tf_args_folders_new(sv, &fs, &err), TF_OK);
    tf_args_folder_of(&fs, "east", folder, sizeof folder);
    ck_assert_str_eq(folder, "east");
    tf_args_folder_of(&fs, "no such/one", folder, sizeof folder);
    ck_assert_str_eq(folder, "no_such_one");
    tf_args_folders_free(&fs);
    ck_assert_int_eq(tf_args_folders_new(NULL, &none, &err), TF_OK);
    tf_args_folder_of(&none, "summary.csv", folder, sizeof folder);
    ck_assert_str_eq(folder, "summary.csv_");
    tf_args_folders_free(&none);
    tf_survey_free(sv);
}
END_TEST

/* Options of earlier versions are answered with their new name (args.c, tf_args_getopt_error). */
START_TEST(renamed_options_named)
{
    static const struct {
        const char *arg, *hint;
    } cases[] = {
        {"--models", "use --model"},
        {"--models=all", "use --model"},
        {"--set", "--parameter NAME=VALUE"},
        {"--fixed", "use --parameter"},
        {"--priors", "use --prior-file"},
        {"--populations", "use --scheme N"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tf_error err;
        tf_error_init(&err);
        ck_assert_int_eq(tf_args_getopt_error("compare", '?', 0, cases[i].arg, &err), TF_ERR_USAGE);
        ck_assert_ptr_nonnull(strstr(first_what(&err), "unknown option"));
        ck_assert_msg(strstr(err.items[0].hint, cases[i].hint), "%s: hint '%s'", cases[i].arg, err.items[0].hint);
    }
    /* A longer name is not an old one: the plain hint. */
    tf_error err;
    tf_error_init(&err);
    tf_args_getopt_error("compare", '?', 0, "--modelsx", &err);
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "tallyfit compare --help"));
}
END_TEST

/* The sampler group: every option read, one set of limits, applied to the sampler and the
 * marginal likelihood, and the refusals. */
START_TEST(sampler_group)
{
    tf_error err;
    tf_error_init(&err);
    tf_args_sampler s;
    tf_args_sampler_init(&s);
    static const struct {
        int code;
        const char *text, *name;
    } given[] = {
        {TF_ARGS_OPT_SEED, "7", "--seed"},
        {TF_ARGS_OPT_CHAINS, "3", "--chains"},
        {TF_ARGS_OPT_WARMUP, "20", "--warmup"},
        {TF_ARGS_OPT_PARTICLES, "50", "--particles"},
        {TF_ARGS_OPT_PROPOSAL, "bootstrap", "--proposal"},
        {TF_ARGS_OPT_CORRELATED, NULL, "--correlated"},
        {TF_ARGS_OPT_THREADS, "2", "--threads"},
        {TF_ARGS_OPT_ITER, "300", "--iterations"},
        {TF_ARGS_OPT_ML_SE, "0.1", "--ml-se"},
        {TF_ARGS_OPT_DRAWS, "100", "--draws"},
        {TF_ARGS_OPT_PRIOR, "x1_mean=5,x1_sd=0.5", "--prior"},
        {TF_ARGS_OPT_PRIOR_FILE, "p.ini", "--prior-file"},
        {TF_ARGS_OPT_WEIGHTS, "ricker=3,gompertz+negbin=0.5", "--model-weights"},
    };
    for (size_t i = 0; i < sizeof given / sizeof given[0]; i++)
        ck_assert_str_eq(tf_args_sampler_option(given[i].code, given[i].text, &s, &err), given[i].name);
    ck_assert_uint_eq(err.n_items, 0);
    ck_assert_ptr_null(tf_args_sampler_option(TF_ARGS_OPT_ITER - 1, "1", &s, &err));
    /* --seed alone does not set up a fit (forecast --parameter takes it). */
    ck_assert_str_eq(s.first, "--chains");
    ck_assert_str_eq(s.first_ml, "--ml-se");

    tf_pmmh_options fit = tf_pmmh_default_options();
    tf_evidence_options ml = tf_evidence_default_options();
    uint64_t seed = 1;
    size_t threads = 1;
    ck_assert_int_eq(tf_args_sampler_apply(&s, &fit, &ml, &seed, &threads, &err), TF_OK);
    ck_assert_uint_eq(seed, 7);
    ck_assert_uint_eq(threads, 2);
    ck_assert_uint_eq(fit.n_chains, 3);
    ck_assert_uint_eq(fit.n_warmup, 20);
    ck_assert_uint_eq(fit.n_particles, 50);
    ck_assert_uint_eq(ml.n_particles, 50);
    ck_assert_int_eq(fit.proposal, TF_PROPOSAL_BOOTSTRAP);
    ck_assert_int_eq(ml.proposal, TF_PROPOSAL_BOOTSTRAP);
    ck_assert_int_eq(fit.correlated, 1);
    ck_assert_uint_eq(fit.min_iter, 300);
    ck_assert_uint_eq(fit.max_iter, 300);
    ck_assert_double_eq(ml.target_se, 0.1);
    ck_assert_uint_eq(ml.n_draws, 100);
    ck_assert_uint_le(ml.n_adapt_draws, 100);

    /* Without a marginal likelihood its options are refused; seed and threads then go to fit. */
    fit = tf_pmmh_default_options();
    ck_assert_int_eq(tf_args_sampler_apply(&s, &fit, NULL, NULL, NULL, &err), TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(first_what(&err), "--ml-se"));
    ck_assert_uint_eq(fit.seed, 7);
    ck_assert_uint_eq(fit.n_threads, 2);
    /* Prior model weights: names of candidates, positive weights. */
    tf_error_init(&err);
    const char *wn[TF_ARGS_MAX_PAIRS];
    double wv[TF_ARGS_MAX_PAIRS];
    size_t nw = 0;
    static const char *const growth2[] = {"ricker", "gompertz"}, *const obs1[] = {"negbin"};
    ck_assert_int_eq(tf_args_sampler_weights(&s, growth2, 2, obs1, 1, wn, wv, &nw, &err), TF_OK);
    ck_assert_uint_eq(nw, 2);
    ck_assert_str_eq(wn[1], "gompertz+negbin");
    ck_assert_double_eq(wv[0], 3);
    ck_assert_int_eq(tf_args_sampler_weights(&s, growth2, 1, obs1, 1, wn, wv, &nw, &err), TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(first_what(&err), "'gompertz+negbin' names no candidate model"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_args_sampler_weights(&s, NULL, 0, obs1 + 1, 0, wn, wv, &nw, &err), TF_OK); /* all candidates */
    /* The priors the candidates of a comparison take. */
    tf_setup_user u;
    tf_args_sampler_user(&s, &u);
    ck_assert_str_eq(u.prior_file, "p.ini");
    ck_assert_double_eq(u.x1_mean, 5);
    ck_assert_double_eq(u.x1_sd, 0.5);
    /* --standard after --correlated wins; --prior takes only the first-year prior. */
    tf_args_sampler_init(&s);
    tf_error_init(&err);
    tf_args_sampler_option(TF_ARGS_OPT_CORRELATED, NULL, &s, &err);
    tf_args_sampler_option(TF_ARGS_OPT_STANDARD, NULL, &s, &err);
    tf_args_sampler_option(TF_ARGS_OPT_PRIOR, "r=0.5", &s, &err);
    fit = tf_pmmh_default_options();
    fit.correlated = 1;
    ck_assert_int_eq(tf_args_sampler_apply(&s, &fit, NULL, NULL, NULL, &err), TF_ERR_USAGE);
    ck_assert_int_eq(fit.correlated, 0);
    ck_assert_ptr_nonnull(strstr(first_what(&err), "--prior takes x1_mean and x1_sd"));
    tf_args_sampler_user(&s, &u);
    ck_assert_ptr_null(u.prior_file);
    ck_assert(isnan(u.x1_mean) && isnan(u.x1_sd));

    /* One set of limits, whatever the command. */
    static const struct {
        int code;
        const char *text;
    } bad[] = {
        {TF_ARGS_OPT_CHAINS, "0"},      {TF_ARGS_OPT_CHAINS, "65"},      {TF_ARGS_OPT_WARMUP, "19"},
        {TF_ARGS_OPT_WARMUP, "10000001"}, {TF_ARGS_OPT_PARTICLES, "0"}, {TF_ARGS_OPT_PARTICLES, "10000001"},
        {TF_ARGS_OPT_THREADS, "0"},     {TF_ARGS_OPT_THREADS, "257"},    {TF_ARGS_OPT_DRAWS, "99"},
        {TF_ARGS_OPT_DRAWS, "10000001"}, {TF_ARGS_OPT_ML_SE, "11"},      {TF_ARGS_OPT_PROPOSAL, "blind"},
        {TF_ARGS_OPT_SEED, "-1"},       {TF_ARGS_OPT_THIN, "0"},         {TF_ARGS_OPT_THIN, "100000001"},
        {TF_ARGS_OPT_PRIOR, "x1_mean"},     {TF_ARGS_OPT_WEIGHTS, "ricker"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        tf_args_sampler_init(&s);
        tf_error_init(&err);
        tf_args_sampler_option(bad[i].code, bad[i].text, &s, &err);
        ck_assert_msg(tf_error_status(&err) == TF_ERR_USAGE, "option %d '%s' accepted", bad[i].code, bad[i].text);
    }
    tf_args_sampler_init(&s);
    tf_error_init(&err);
    tf_args_sampler_option(TF_ARGS_OPT_THIN, "100000000", &s, &err);
    tf_args_sampler_option(TF_ARGS_OPT_CHAINS, "64", &s, &err);
    tf_args_sampler_option(TF_ARGS_OPT_THREADS, "256", &s, &err);
    ck_assert_uint_eq(err.n_items, 0);
}
END_TEST

/* --parameter and --prior: each name in its own option, then one list to bind. */
START_TEST(parameter_and_prior_merge)
{
    tf_error err;
    tf_error_init(&err);
    tf_arg_pairs values, prior;
    tf_args_pairs_init(&values);
    tf_args_pairs_init(&prior);
    tf_args_parse_pairs("--parameter", "r=0.5,sigma=0.1", &values, &err);
    tf_args_parse_pairs("--prior", "x1_sd=0.4", &prior, &err);
    ck_assert_int_eq(tf_args_merge_prior(&values, &prior, &err), TF_OK);
    ck_assert_uint_eq(values.n, 3);
    ck_assert_double_eq(tf_args_pairs_get(&values, "x1_sd")->value, 0.4);
    /* The first-year prior given as a parameter, and a parameter given as a prior. */
    tf_args_pairs_init(&values);
    tf_args_pairs_init(&prior);
    tf_args_parse_pairs("--parameter", "r=0.5,x1_mean=3", &values, &err);
    tf_args_parse_pairs("--prior", "K=3", &prior, &err);
    ck_assert_int_eq(tf_args_merge_prior(&values, &prior, &err), TF_ERR_USAGE);
    ck_assert_uint_eq(err.n_items, 2);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "--prior takes x1_mean and x1_sd"));
    ck_assert_ptr_nonnull(strstr(err.items[1].what, "x1_mean is the first year's prior"));
    ck_assert_ptr_nonnull(strstr(err.items[1].hint, "--prior x1_mean=V,x1_sd=V"));
    ck_assert_uint_eq(values.n, 2); /* unchanged */
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("args");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, pairs_parse_and_accumulate);
    tcase_add_test(tc, numbers_lists_and_seeds);
    tcase_add_test(tc, parameter_binds_to_the_model);
    tcase_add_test(tc, output_names_are_portable);
    tcase_add_test(tc, names_split);
    tcase_add_test(tc, model_names_known_or_all);
    tcase_add_test(tc, operand_draws_and_folders);
    tcase_add_test(tc, exit_codes_one_mapping);
    tcase_add_test(tc, renamed_options_named);
    tcase_add_test(tc, sampler_group);
    tcase_add_test(tc, parameter_and_prior_merge);
    suite_add_tcase(s, tc);
    return s;
}
