/* Unit tests for the batch module's pieces that the end-to-end test (tests/e2e/batch.sh) reaches
 * only indirectly: results packed for MPI and back, folder names that stay unique on file systems
 * that ignore case, the settings record, the order of the queue, and the refusal of a folder
 * with other settings. */
#include "tf_test.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "batch/batch.h"

START_TEST(result_packs_and_unpacks)
{
    tf_batch_result r = {.index = 4321, .state = TF_BATCH_FAILED, .seconds = 12.345678901234567};
    snprintf(r.reason, sizeof r.reason, "every fit failed, \"quoted\", with commas");
    r.row = strdup("site-1,failed,,,\"every fit failed, \"\"quoted\"\", with commas\"");
    char *buf = NULL;
    size_t len = 0;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_batch_result_pack(&r, &buf, &len, &err), TF_OK);
    tf_batch_result back;
    ck_assert_int_eq(tf_batch_result_unpack(buf, len, &back, &err), TF_OK);
    ck_assert_uint_eq(back.index, 4321);
    ck_assert_int_eq(back.state, TF_BATCH_FAILED);
    /* %.17g round-trips a double exactly (IEEE 754-2008, 5.12.2). */
    ck_assert(back.seconds == r.seconds);
    ck_assert_str_eq(back.reason, r.reason);
    ck_assert_str_eq(back.row, r.row);
    tf_batch_result_clear(&back);
    /* Cut or altered bytes are refused, never read past. */
    for (size_t cut = 0; cut < len; cut += 3)
        ck_assert_int_eq(tf_batch_result_unpack(buf, cut, &back, &err), TF_ERR_INVALID);
    buf[0] = 'X';
    ck_assert_int_eq(tf_batch_result_unpack(buf, len, &back, &err), TF_ERR_INVALID);
    free(buf);
    tf_batch_result_clear(&r);
}
END_TEST

START_TEST(state_names)
{
    ck_assert_str_eq(tf_batch_state_name(TF_BATCH_PENDING), "not done");
    ck_assert_str_eq(tf_batch_state_name(TF_BATCH_DONE), "done");
    ck_assert_str_eq(tf_batch_state_name(TF_BATCH_FAILED), "failed");
    ck_assert_str_eq(tf_batch_state_name(TF_BATCH_BAD_DATA), "bad data");
}
END_TEST

static tf_status no_priors(void *ctx, tf_model *m, const tf_series *s, tf_prior_set **out, tf_error *err)
{
    (void)ctx, (void)m, (void)s, (void)out;
    return tf_error_add(err, TF_ERR_INVALID, NULL, 0, 0, NULL, "not called here");
}

/* Labels that differ only in case or in characters a file name cannot hold, a long series, a
 * short one and one set aside for a bad count. */
static const char survey_text[] =
    "population,year,count\n"
    "Site A,2000,5\nSite A,2001,6\nSite A,2002,7\nSite A,2003,8\nSite A,2004,9\n"
    "site_a,2000,5\nsite_a,2001,6\nsite_a,2002,7\nsite_a,2003,8\nsite_a,2004,9\nsite_a,2005,9\nsite_a,2006,9\n"
    "pond/3,2000,5\npond/3,2001,x\npond/3,2002,7\npond/3,2003,8\npond/3,2004,9\n"
    "\xc3\xa9tang,2000,5\n\xc3\xa9tang,2001,6\n\xc3\xa9tang,2002,7\n\xc3\xa9tang,2003,8\n\xc3\xa9tang,2004,9\n"
    "\xc3\xa9tang,2005,9\n";

typedef struct {
    char dir[64], path[128], root[192], xlsx[192];
    tf_survey *sv;
    tf_batch_options o;
} fixture;

static void setup(fixture *f)
{
    *f = (fixture){0};   /* options left out are zero, as the command's designated initialiser leaves them */
    snprintf(f->dir, sizeof f->dir, "/tmp/tf-test-batch-XXXXXX");
    ck_assert_ptr_nonnull(mkdtemp(f->dir));
    snprintf(f->path, sizeof f->path, "%s/s.csv", f->dir);
    snprintf(f->root, sizeof f->root, "%s/out/s", f->dir);
    snprintf(f->xlsx, sizeof f->xlsx, "%s/out/s.xlsx", f->dir);
    FILE *fp = fopen(f->path, "w");
    ck_assert_ptr_nonnull(fp);
    fputs(survey_text, fp);
    fclose(fp);
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_survey_read_batch(f->path, 0, &f->sv, &err), TF_OK);
    ck_assert_int_eq(tf_analysis_options_init(&f->o.analysis, &err), TF_OK);
    f->o.analysis.priors = no_priors;
    f->o.survey_path = f->path;
    f->o.title = "s";
    f->o.root = f->root;
    f->o.workbook = f->xlsx;
    f->o.workbook_limit = TF_BATCH_WORKBOOK_LIMIT;
}

static void teardown(fixture *f)
{
    tf_survey_free(f->sv);
    char cmd[256];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", f->dir);
    ck_assert_int_eq(system(cmd), 0);
}

START_TEST(folders_unique_and_safe)
{
    fixture f;
    setup(&f);
    tf_batch *b = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_batch_new(f.sv, &f.o, &b, &err), TF_OK);
    ck_assert_uint_eq(tf_batch_n_populations(b), 4);
    static const char *const want[] = {"Site_A", "site_a-2", "pond_3", "__tang"};
    for (size_t i = 0; i < 4; i++) {
        char path[256];
        snprintf(path, sizeof path, "%s/%s", f.root, want[i]);
        ck_assert_str_eq(tf_batch_folder(b, i), path);
    }
    ck_assert_str_eq(tf_batch_label(b, 2), "pond/3");
    /* Every setting that changes a number is in the record, the seed among them. */
    ck_assert_ptr_nonnull(strstr(tf_batch_settings(b), "\nseed 1\n"));
    ck_assert_ptr_nonnull(strstr(tf_batch_settings(b), "\nsurvey-sha256 "));
    ck_assert_ptr_null(strstr(tf_batch_settings(b), "thread"));
    tf_batch_free(b);
    teardown(&f);
}
END_TEST

START_TEST(queue_longest_first_and_other_settings_refused)
{
    fixture f;
    setup(&f);
    tf_batch *b = NULL;
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_batch_new(f.sv, &f.o, &b, &err), TF_OK);
    ck_assert_int_eq(tf_batch_prepare(b, &err), TF_OK);
    ck_assert_uint_eq(tf_batch_n_resumed(b), 0);
    ck_assert_uint_eq(tf_batch_n_todo(b), 4);
    /* 7 years, then 6, then 5 (file order among equals), then the set-aside one. */
    size_t want[] = {1, 3, 0, 2};
    for (size_t k = 0; k < 4; k++)
        ck_assert_uint_eq(tf_batch_todo(b, k), want[k]);
    /* The set-aside population is settled without any analysis, and counts as settled when the
     * batch is prepared again. */
    tf_batch_result res;
    ck_assert_int_eq(tf_batch_run_one(b, 2, 1, NULL, &res, &err), TF_OK);
    ck_assert_int_eq(res.state, TF_BATCH_BAD_DATA);
    ck_assert_ptr_nonnull(strstr(res.reason, "line 15, field 3: count 'x' is not a number"));
    tf_batch_record(b, &res);
    ck_assert_int_eq(tf_batch_state_of(b, 2), TF_BATCH_BAD_DATA);
    tf_batch_free(b);

    ck_assert_int_eq(tf_batch_new(f.sv, &f.o, &b, &err), TF_OK);
    ck_assert_int_eq(tf_batch_prepare(b, &err), TF_OK);
    ck_assert_uint_eq(tf_batch_n_resumed(b), 1);
    ck_assert_uint_eq(tf_batch_n_todo(b), 3);
    ck_assert_int_eq(tf_batch_state_of(b, 2), TF_BATCH_BAD_DATA);
    ck_assert_str_eq(tf_batch_reason(b, 2), res.reason);
    tf_batch_free(b);

    /* Another seed in the same folder: refused, naming the line. */
    f.o.analysis.seed = 2;
    ck_assert_int_eq(tf_batch_new(f.sv, &f.o, &b, &err), TF_OK);
    ck_assert_int_eq(tf_batch_prepare(b, &err), TF_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(err.items[0].what, "it has 'seed 1', this run has 'seed 2'"));
    tf_batch_free(b);
    /* --fresh: the earlier results go, nothing counts as settled. */
    f.o.fresh = 1;
    tf_error_init(&err);
    ck_assert_int_eq(tf_batch_new(f.sv, &f.o, &b, &err), TF_OK);
    ck_assert_int_eq(tf_batch_prepare(b, &err), TF_OK);
    ck_assert_uint_eq(tf_batch_n_resumed(b), 0);
    ck_assert_int_ne(access(tf_batch_folder(b, 2), F_OK), 0);
    tf_batch_free(b);
    teardown(&f);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("batch");
    TCase *c = tcase_create("batch");
    tcase_add_test(c, result_packs_and_unpacks);
    tcase_add_test(c, state_names);
    tcase_add_test(c, folders_unique_and_safe);
    tcase_add_test(c, queue_longest_first_and_other_settings_refused);
    suite_add_tcase(s, c);
    return s;
}
