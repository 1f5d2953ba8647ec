/* Unit tests of model-file reading: good files, one bad file per kind of mistake (each error must
 * name its line and the key or section), survey scaling, the shipped models/ files and the
 * search for the model directory. */
#include "tf_test.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "model/model.h"
#include "model/model_file.h"

static tf_model_file *read_ok(const char *path)
{
    tf_error err;
    tf_error_init(&err);
    tf_model_file *mf = NULL;
    tf_status st = tf_model_file_read(path, &mf, &err);
    if (st != TF_OK)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    ck_assert_uint_eq(err.n_items, 0);
    return mf;
}

static tf_prior prior_of(const tf_model_file *mf, const char *name, double median)
{
    tf_error err;
    tf_error_init(&err);
    tf_prior p;
    tf_status st = tf_model_file_prior(mf, name, median, &p, &err);
    if (st != TF_OK)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    return p;
}

START_TEST(good_file_reads)
{
    tf_model_file *mf = read_ok(TF_TEST_DATA("models/good/full.ini"));
    ck_assert_str_eq(tf_model_file_name(mf), "full");
    ck_assert_str_eq(tf_model_file_description(mf), "A test model with one parameter per prior family.");
    ck_assert_str_eq(tf_model_file_label(mf), "tests/data/models/good/full.ini");
    ck_assert_uint_eq(tf_model_file_n_params(mf), 6);
    ck_assert_str_eq(tf_model_file_param_at(mf, 0), "a");
    ck_assert_str_eq(tf_model_file_param_at(mf, 5), "f");
    ck_assert_ptr_null(tf_model_file_param_at(mf, 6));
    ck_assert(tf_model_file_has(mf, "d"));
    ck_assert(!tf_model_file_has(mf, "g"));
    ck_assert(tf_model_file_needs_survey(mf));

    char buf[160];
    tf_prior p = prior_of(mf, "a", NAN);
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "normal(mean=0.5, sd=0.5) truncated to [0, inf)");
    /* meanlog = survey: log(median) + survey_shift. */
    p = prior_of(mf, "b", 400);
    ck_assert_int_eq(p.kind, TF_PRIOR_LOGNORMAL);
    ck_assert_double_eq_tol(p.par[0], log(400.0) + 0.25, 1e-12);
    ck_assert_double_eq(p.par[1], 1.5);
    ck_assert_double_eq(p.lower, 1);
    p = prior_of(mf, "c", NAN);
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "halfnormal(sd=0.5)");
    p = prior_of(mf, "d", NAN);
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "gamma(shape=2, rate=5) truncated to (-inf, 3]");
    p = prior_of(mf, "e", NAN);
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "uniform(min=-1, max=3)");
    p = prior_of(mf, "f", NAN);
    tf_prior_describe(&p, buf, sizeof buf);
    ck_assert_str_eq(buf, "student_t(location=0, scale=2.5, df=3) truncated to (-inf, 10]");
    tf_model_file_free(mf);

    mf = read_ok(TF_TEST_DATA("models/good/minimal.ini"));
    ck_assert_str_eq(tf_model_file_name(mf), "minimal");
    ck_assert_str_eq(tf_model_file_description(mf), "");
    ck_assert_uint_eq(tf_model_file_n_params(mf), 0);
    ck_assert(!tf_model_file_needs_survey(mf));
    tf_model_file_free(mf);
    tf_model_file_free(NULL);
}
END_TEST

START_TEST(survey_scaling_needs_a_median)
{
    tf_model_file *mf = read_ok(TF_TEST_DATA("models/good/full.ini"));
    const double bad[] = {NAN, 0, -3, INFINITY};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        tf_error err;
        tf_error_init(&err);
        tf_prior p;
        ck_assert_int_eq(tf_model_file_prior(mf, "b", bad[i], &p, &err), TF_ERR_INVALID);
        ck_assert_uint_eq(err.n_items, 1);
        ck_assert_int_eq(err.items[0].line, 14); /* the "prior =" line of [b] */
        ck_assert_ptr_nonnull(strstr(err.items[0].what, "meanlog = survey"));
        ck_assert_ptr_nonnull(strstr(err.items[0].hint, "[b]"));
    }
    tf_error err;
    tf_error_init(&err);
    tf_prior p;
    ck_assert_int_eq(tf_model_file_prior(mf, "zz", 1, &p, &err), TF_ERR_INVALID);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "'zz'"));
    /* A median so large that the truncation at 1 removes nothing still works. */
    p = prior_of(mf, "b", 1e9);
    ck_assert_double_eq_tol(p.par[0], log(1e9) + 0.25, 1e-9);
    tf_model_file_free(mf);
}
END_TEST

/* Each bad file, the line one of its errors must name and the text that error must contain
 * (the key or section concerned, and what is wrong). A mistake can cause more errors (a
 * misspelt key also leaves the right one missing); those are checked elsewhere. */
static const struct {
    const char *file;
    long line;
    const char *text[3];
} bad_files[] = {
    {"unknown-key.ini", 8, {"unknown key 'mode'", "[r]"}},
    {"unknown-distribution.ini", 5, {"key 'prior'", "unknown distribution 'lognorm'"}},
    {"missing-value.ini", 5, {"needs key 'sdlog'", "[K]"}},
    {"not-a-number.ini", 6, {"key 'sd'", "expected a finite number, got 'half'"}},
    {"sd-not-positive.ini", 7, {"key 'sd'", "must be a positive finite number, got 0"}},
    {"lower-above-upper.ini", 9, {"key 'upper'", "lower (5) must be below upper (1)"}},
    {"wrong-family-key.ini", 7, {"key 'sdlog'", "belongs to a lognormal prior"}},
    {"duplicate-key.ini", 8, {"key 'sd'", "given again (first on line 7)"}},
    {"syntax.ini", 6, {"line 'mean 0.5'", "neither 'key = value'"}},
    {"outside-section.ini", 1, {"key 'name'", "outside any section"}},
    {"no-model-name.ini", 3, {"key 'name'", "[model]"}},
    {"survey-wrong-place.ini", 6, {"key 'mean'", "cannot be scaled by the survey"}},
    {"shift-without-survey.ini", 8, {"key 'survey_shift'", "only allowed with 'meanlog = survey'"}},
    {"no-prior.ini", 5, {"[r]", "no key 'prior'"}},
    {"uniform-min-max.ini", 7, {"key 'max'", "must be above min"}},
    {"empty-truncation.ini", 5, {"[sigma]", "leaves nothing of its support"}},
    {"no-mass.ini", 5, {"[r]", "keeps no representable probability"}},
    {"bound-nan.ini", 8, {"key 'lower'", "expected a number, got 'nan'"}},
    {"infinite-mean.ini", 6, {"key 'mean'", "expected a finite number, got 'inf'"}},
    {"indented.ini", 6, {"key 'prior'", "given again (first on line 5)"}},
    {"unknown-model-key.ini", 3, {"unknown key 'kind'", "[model]"}},
    {"long-line.ini", 3, {"longer than"}},
    {"many-errors.ini", 6, {"key 'mean'", "expected a finite number, got 'zero'"}},
};

START_TEST(bad_file_names_line_and_key)
{
    int i = _i;
    char path[256];
    snprintf(path, sizeof path, "tests/data/models/bad/%s", bad_files[i].file);
    tf_error err;
    tf_error_init(&err);
    tf_model_file *mf = (tf_model_file *)&err; /* must come back NULL */
    ck_assert_int_eq(tf_model_file_read(path, &mf, &err), TF_ERR_PARSE);
    ck_assert_ptr_null(mf);
    ck_assert_uint_ge(err.n_items, 1);
    const tf_error_item *it = NULL;
    for (size_t k = 0; k < err.n_items && !it; k++)
        if (err.items[k].line == bad_files[i].line && strstr(err.items[k].what, bad_files[i].text[0]))
            it = &err.items[k];
    if (!it)
        tf_error_print(&err, "test", stderr);
    ck_assert_msg(it != NULL, "%s: no error on line %ld about %s", bad_files[i].file, bad_files[i].line,
                  bad_files[i].text[0]);
    ck_assert_str_eq(it->file, path);
    for (int k = 1; k < 3 && bad_files[i].text[k]; k++)
        ck_assert_msg(strstr(it->what, bad_files[i].text[k]), "%s: '%s' lacks '%s'", bad_files[i].file, it->what,
                      bad_files[i].text[k]);
    /* Errors come in line order, and every one names a line of the file. */
    for (size_t k = 0; k < err.n_items; k++) {
        ck_assert_int_gt(err.items[k].line, 0);
        if (k)
            ck_assert_int_le(err.items[k - 1].line, err.items[k].line);
    }
}
END_TEST

START_TEST(all_errors_are_collected_in_line_order)
{
    tf_error err;
    tf_error_init(&err);
    tf_model_file *mf;
    ck_assert_int_eq(tf_model_file_read(TF_TEST_DATA("models/bad/many-errors.ini"), &mf, &err), TF_ERR_PARSE);
    ck_assert_uint_eq(err.n_items, 4);
    const long lines[] = {6, 7, 13, 16};
    const char *keys[] = {"key 'mean'", "key 'sd'", "key 'scale'", "key 'prior'"};
    for (int i = 0; i < 4; i++) {
        ck_assert_int_eq(err.items[i].line, lines[i]);
        ck_assert_msg(strstr(err.items[i].what, keys[i]), "'%s' lacks '%s'", err.items[i].what, keys[i]);
    }
    ck_assert_ptr_nonnull(strstr(err.items[3].hint, "halfnormal"));
    /* The indentation mistake gets a hint about indentation. */
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_read(TF_TEST_DATA("models/bad/indented.ini"), &mf, &err), TF_ERR_PARSE);
    int hinted = 0;
    for (size_t k = 0; k < err.n_items; k++)
        hinted |= err.items[k].line == 6 && strstr(err.items[k].hint, "indent") != NULL;
    ck_assert(hinted);
}
END_TEST

START_TEST(unreadable_and_in_memory)
{
    tf_error err;
    tf_error_init(&err);
    tf_model_file *mf;
    ck_assert_int_eq(tf_model_file_read("tests/data/models/none-such.ini", &mf, &err), TF_ERR_IO);
    ck_assert_ptr_null(mf);
    ck_assert_str_eq(err.items[0].file, "tests/data/models/none-such.ini");

    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_parse("[model]\nname = m\n[q]\nprior = gamma\nshape = 2\nrate = 1\n", "inline",
                                         &mf, &err),
                     TF_OK);
    ck_assert_str_eq(tf_model_file_name(mf), "m");
    tf_prior p = prior_of(mf, "q", NAN);
    ck_assert_int_eq(p.kind, TF_PRIOR_GAMMA);
    tf_model_file_free(mf);

    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_parse("[q]\nprior = gamma\nshape = 2\nrate = 1\n", "inline", &mf, &err),
                     TF_ERR_PARSE);
    ck_assert_str_eq(err.items[0].file, "inline");
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "no [model] section"));
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_parse("", NULL, &mf, &err), TF_ERR_PARSE);
    ck_assert_str_eq(err.items[0].file, "(model text)");
}
END_TEST

START_TEST(names_are_checked_against_the_model)
{
    tf_model_file *mf = read_ok(TF_TEST_DATA("models/good/extra.ini"));
    const char *names[] = {"r", "K", "sigma"};
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_check_names(mf, names, 3, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(err.n_items, 1);
    ck_assert_int_eq(err.items[0].line, 10); /* first key of [Kappa] */
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "no parameter 'Kappa'"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "r, K, sigma"));
    const char *all[] = {"r", "Kappa"};
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_check_names(mf, all, 2, &err), TF_OK);
    ck_assert_uint_eq(err.n_items, 0);
    tf_model_file_free(mf);
}
END_TEST

/* One shipped file: it reads cleanly, names exactly the parameters given, describes itself,
 * gives every prior a support inside the parameter's range, and resolves survey scaling. */
static void check_shipped(const char *path, const char *model_name, const char *const *params,
                          const double *lower, const double *upper, size_t n)
{
    tf_model_file *mf = read_ok(path);
    ck_assert_msg(!strcmp(tf_model_file_name(mf), model_name), "%s: [model] name = %s, want %s", path,
                      tf_model_file_name(mf), model_name);
    ck_assert_msg(tf_model_file_n_params(mf) == n, "%s: %zu parameters, the model table has %zu", path,
                  tf_model_file_n_params(mf), n);
    ck_assert_uint_gt(strlen(tf_model_file_description(mf)), 20);
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_check_names(mf, params, n, &err), TF_OK);
    tf_prior_set *set;
    ck_assert_int_eq(tf_prior_set_new(n, params, lower, upper, &set, &err), TF_OK);
    tf_status st = tf_model_file_apply(mf, 350, set, &err);
    if (st != TF_OK)
        tf_error_print(&err, "test", stderr);
    ck_assert_int_eq(st, TF_OK);
    ck_assert_int_eq(tf_prior_set_check_complete(set, &err), TF_OK);
    int k_index = tf_prior_set_index(set, "K");
    if (k_index >= 0) {
        ck_assert(tf_model_file_needs_survey(mf));
        ck_assert_double_eq_tol(tf_prior_set_prior(set, (size_t)k_index)->par[0], log(350.0), 1e-12);
    }
    tf_prior_set_free(set);
    tf_model_file_free(mf);
}

/* The files shipped in models/, taken from the model table rather than listed here, so that a
 * new model is checked as soon as it is in the table: models/<name>.ini for every growth model
 * (its parameters and sigma, with the supports of the table), and models/observation.ini with
 * the parameters of every counting-error model. */
START_TEST(shipped_files_are_complete)
{
    const char *names[TF_MAX_PARAMS * 4];
    double lower[TF_MAX_PARAMS * 4], upper[TF_MAX_PARAMS * 4];
    char path[128];
    for (size_t i = 0; i < tf_model_n_growth(); i++) {
        const tf_growth_type *g = tf_model_growth_at(i);
        size_t n = 0;
        for (size_t k = 0; k < g->n_params; k++, n++) {
            names[n] = g->param_names[k];
            lower[n] = g->lower[k];
            upper[n] = g->upper[k];
        }
        names[n] = "sigma", lower[n] = 0, upper[n] = INFINITY, n++;
        snprintf(path, sizeof path, "models/%s.ini", g->name);
        check_shipped(path, g->name, names, lower, upper, n);
    }
    size_t n = 0;
    for (size_t i = 0; i < tf_model_n_obs(); i++) {
        const tf_obs_type *o = tf_model_obs_at(i);
        for (size_t k = 0; k < o->n_params; k++) {
            size_t j = 0;
            while (j < n && strcmp(names[j], o->param_names[k]))
                j++;
            if (j < n) /* shared by several models (tau): the widest support */
                lower[j] = fmin(lower[j], o->lower[k]), upper[j] = fmax(upper[j], o->upper[k]);
            else {
                ck_assert_uint_lt(n, sizeof names / sizeof names[0]);
                names[n] = o->param_names[k], lower[n] = o->lower[k], upper[n] = o->upper[k], n++;
            }
        }
    }
    check_shipped("models/observation.ini", "observation", names, lower, upper, n);
}
END_TEST

START_TEST(apply_reports_file_and_line)
{
    tf_model_file *mf = read_ok(TF_TEST_DATA("models/good/full.ini"));
    const char *names[] = {"a", "b", "c", "x"};
    const double lower[] = {1, 0, 0, 0}, upper[] = {INFINITY, INFINITY, INFINITY, INFINITY};
    tf_error err;
    tf_error_init(&err);
    tf_prior_set *set;
    ck_assert_int_eq(tf_prior_set_new(4, names, lower, upper, &set, &err), TF_OK);
    /* a's prior starts at 0 but the model wants a >= 1; b needs a median but gets none. */
    ck_assert_int_eq(tf_model_file_apply(mf, NAN, set, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(err.n_items, 2);
    ck_assert_str_eq(err.items[0].file, "tests/data/models/good/full.ini");
    ck_assert_int_eq(err.items[0].line, 8);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "prior for a"));
    ck_assert_int_eq(err.items[1].line, 14);
    ck_assert_ptr_null(tf_prior_set_prior(set, 0));
    ck_assert_ptr_null(tf_prior_set_prior(set, 1));
    ck_assert_ptr_nonnull(tf_prior_set_prior(set, 2)); /* c went in */
    tf_error_init(&err);
    ck_assert_int_eq(tf_prior_set_check_complete(set, &err), TF_ERR_INVALID);
    ck_assert_uint_eq(err.n_items, 3); /* a, b and x */
    tf_prior_set_free(set);
    tf_model_file_free(mf);
}
END_TEST

START_TEST(model_directory_search)
{
    char path[512];
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(setenv(TF_MODELS_ENV, "tests/data/models/good", 1), 0);
    ck_assert_int_eq(tf_model_file_locate("full.ini", path, sizeof path, &err), TF_OK);
    ck_assert_str_eq(path, "tests/data/models/good/full.ini");
    tf_model_file *mf;
    ck_assert_int_eq(tf_model_file_read_default("minimal", &mf, &err), TF_OK);
    ck_assert_str_eq(tf_model_file_name(mf), "minimal");
    tf_model_file_free(mf);

    /* Not there: the message lists the places searched, the hint names the variable. */
    ck_assert_int_eq(tf_model_file_locate("none-such.ini", path, sizeof path, &err), TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "'none-such.ini' not found"));
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "tests/data/models/good (from TALLYFIT_MODELS)"));
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "/models"));
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "/../share/tallyfit/models"));
    ck_assert_ptr_nonnull(strstr(err.items[0].hint, "TALLYFIT_MODELS"));
    ck_assert_str_eq(path, "");
    ck_assert_int_eq(tf_model_file_read_default("none-such", &mf, &err), TF_ERR_IO);
    ck_assert_ptr_null(mf);

    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_locate("../good/full.ini", path, sizeof path, &err), TF_ERR_INVALID);
    ck_assert_int_eq(tf_model_file_locate("", path, sizeof path, &err), TF_ERR_INVALID);
    char tiny[8];
    ck_assert_int_eq(tf_model_file_locate("full.ini", tiny, sizeof tiny, &err), TF_ERR_RANGE);

    ck_assert_int_eq(unsetenv(TF_MODELS_ENV), 0);
    tf_error_init(&err);
    ck_assert_int_eq(tf_model_file_locate("none-such.ini", path, sizeof path, &err), TF_ERR_IO);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "$TALLYFIT_MODELS (not set)"));
}
END_TEST

static Suite *make_suite(void)
{
    gsl_set_error_handler_off();
    Suite *s = suite_create("model_file");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, good_file_reads);
    tcase_add_test(tc, survey_scaling_needs_a_median);
    tcase_add_loop_test(tc, bad_file_names_line_and_key, 0, (int)(sizeof bad_files / sizeof bad_files[0]));
    tcase_add_test(tc, all_errors_are_collected_in_line_order);
    tcase_add_test(tc, unreadable_and_in_memory);
    tcase_add_test(tc, names_are_checked_against_the_model);
    tcase_add_test(tc, shipped_files_are_complete);
    tcase_add_test(tc, apply_reports_file_and_line);
    tcase_add_test(tc, model_directory_search);
    suite_add_tcase(s, tc);
    return s;
}
