/* Unit tests for writing a command's output files as one group (cmd/fileset). */
#include "tf_test.h"

#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cmd/fileset.h"

static int exists(const char *path)
{
    struct stat info;
    return stat(path, &info) == 0;
}

static void slurp(const char *path, char *buf, size_t size)
{
    FILE *f = fopen(path, "rb");
    ck_assert_ptr_nonnull(f);
    size_t n = fread(buf, 1, size - 1, f);
    buf[n] = '\0';
    fclose(f);
}

/* Two folders of files in one group: nothing is in place before the commit, everything after. */
START_TEST(a_committed_group_puts_every_file_in_place)
{
    char top[] = "/tmp/tf-fileset-XXXXXX", a[64], b[64], pa[96], pb1[96], pb2[96], text[64];
    ck_assert_ptr_nonnull(mkdtemp(top));
    snprintf(a, sizeof a, "%s/x/a", top);
    snprintf(b, sizeof b, "%s/x/b", top);
    snprintf(pa, sizeof pa, "%s/one.csv", a);
    snprintf(pb1, sizeof pb1, "%s/one.csv", b);
    snprintf(pb2, sizeof pb2, "%s/two.csv", b);
    tf_error err;
    tf_error_init(&err);
    tf_fileset *g = tf_fileset_new(2, 3, &err);
    ck_assert_ptr_nonnull(g);
    FILE *f;
    ck_assert_int_eq(tf_fileset_mkdir(g, a, &err), TF_OK);
    ck_assert_int_eq(tf_fileset_open(g, pa, NULL, &f, &err), TF_OK);
    fputs("a1\n", f);
    ck_assert_int_eq(tf_fileset_mkdir(g, b, &err), TF_OK);
    ck_assert_int_eq(tf_fileset_open(g, pb1, NULL, &f, &err), TF_OK);
    fputs("b1\n", f);
    ck_assert_int_eq(tf_fileset_open(g, pb2, NULL, &f, &err), TF_OK);
    fputs("b2\n", f);
    ck_assert(!exists(pa) && !exists(pb1) && !exists(pb2));
    ck_assert_int_eq(tf_fileset_finish(g, TF_OK, &err), TF_OK);
    slurp(pa, text, sizeof text);
    ck_assert_str_eq(text, "a1\n");
    slurp(pb2, text, sizeof text);
    ck_assert_str_eq(text, "b2\n");
    unlink(pa);
    unlink(pb1);
    unlink(pb2);
    rmdir(a);
    rmdir(b);
    snprintf(a, sizeof a, "%s/x", top);
    rmdir(a);
    ck_assert_int_eq(rmdir(top), 0);
}
END_TEST

/* A group that fails part-way leaves no file and takes away the folders it made, but not a
 * folder that was there before. */
START_TEST(a_failed_group_leaves_nothing_behind)
{
    char top[] = "/tmp/tf-fileset-XXXXXX", a[64], p[96];
    ck_assert_ptr_nonnull(mkdtemp(top));
    snprintf(a, sizeof a, "%s/new/deeper", top);
    snprintf(p, sizeof p, "%s/one.csv", a);
    tf_error err;
    tf_error_init(&err);
    tf_fileset *g = tf_fileset_new(1, 1, &err);
    ck_assert_ptr_nonnull(g);
    FILE *f;
    ck_assert_int_eq(tf_fileset_mkdir(g, a, &err), TF_OK);
    ck_assert_int_eq(tf_fileset_open(g, p, NULL, &f, &err), TF_OK);
    fputs("x\n", f);
    /* No room for a second file: refused, and the group is still whole. */
    ck_assert_int_eq(tf_fileset_open(g, p, NULL, &f, &err), TF_ERR_INVALID);
    ck_assert_ptr_null(f);
    ck_assert_int_eq(tf_fileset_finish(g, TF_ERR_IO, &err), TF_ERR_IO);
    ck_assert(!exists(p));
    snprintf(a, sizeof a, "%s/new", top);
    ck_assert(!exists(a));
    ck_assert_int_eq(rmdir(top), 0);
    /* finish accepts the NULL of a group that could not be made. */
    ck_assert_int_eq(tf_fileset_finish(NULL, TF_ERR_NOMEM, &err), TF_ERR_NOMEM);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("fileset");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, a_committed_group_puts_every_file_in_place);
    tcase_add_test(tc, a_failed_group_leaves_nothing_behind);
    suite_add_tcase(s, tc);
    return s;
}
