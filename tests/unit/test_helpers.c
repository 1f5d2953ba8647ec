/* Unit tests for the small shared helpers of src/util: growing arrays (buf), order statistics
 * (stats), UTF-8 checks (utf8) and the folder of a path (path). */
#include "tf_test.h"
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "util/buf.h"
#include "util/path.h"
#include "util/stats.h"
#include "util/utf8.h"

START_TEST(buf_grows_by_doubling_and_keeps_contents)
{
    int *a = NULL;
    size_t cap = 0;
    ck_assert_int_eq(tf_buf_grow((void **)&a, &cap, 1, sizeof *a, 8), 1);
    ck_assert_uint_eq(cap, 8);
    for (int i = 0; i < 8; i++)
        a[i] = i * i;
    ck_assert_int_eq(tf_buf_grow((void **)&a, &cap, 5, sizeof *a, 8), 1);
    ck_assert_uint_eq(cap, 8); /* enough room already: nothing moves */
    ck_assert_int_eq(tf_buf_grow((void **)&a, &cap, 33, sizeof *a, 8), 1);
    ck_assert_uint_eq(cap, 64); /* 8 -> 16 -> 32 -> 64 */
    for (int i = 0; i < 8; i++)
        ck_assert_int_eq(a[i], i * i);
    a[63] = 7;
    free(a);
    /* first = 0 still starts somewhere */
    char *c = NULL;
    cap = 0;
    ck_assert_int_eq(tf_buf_grow((void **)&c, &cap, 3, 1, 0), 1);
    ck_assert_uint_eq(cap, 4);
    free(c);
}
END_TEST

START_TEST(buf_refuses_overflow_and_leaves_the_array)
{
    double *a = NULL;
    size_t cap = 0;
    ck_assert_int_eq(tf_buf_grow((void **)&a, &cap, 4, sizeof *a, 4), 1);
    a[0] = 1.5;
    double *before = a;
    /* SIZE_MAX / 4 elements of 8 bytes cannot be addressed: a failure, not a wrapped size. */
    ck_assert_int_eq(tf_buf_grow((void **)&a, &cap, SIZE_MAX / 4, sizeof *a, 4), 0);
    ck_assert_int_eq(tf_buf_grow((void **)&a, &cap, SIZE_MAX, 1, 4), 0);
    ck_assert_ptr_eq(a, before);
    ck_assert_uint_eq(cap, 4);
    ck_assert_double_eq(a[0], 1.5);
    free(a);
}
END_TEST

/* Reference values: R's quantile(x, type = 7) definition (Hyndman & Fan 1996, definition 7),
 * worked by hand for x = 1, 2, 4, 8: position (n - 1) p = 3 p. */
START_TEST(stats_quantiles_and_median)
{
    double x[] = {8, 1, 4, 2};
    tf_stats_sort(x, 4);
    ck_assert(x[0] == 1 && x[1] == 2 && x[2] == 4 && x[3] == 8);
    ck_assert_double_eq(tf_stats_quantile_sorted(x, 4, 0.0), 1);
    ck_assert_double_eq(tf_stats_quantile_sorted(x, 4, 1.0), 8);
    ck_assert_double_eq_tol(tf_stats_quantile_sorted(x, 4, 0.5), 3.0, 1e-15);   /* 2 + 0.5 (4 - 2) */
    ck_assert_double_eq_tol(tf_stats_quantile_sorted(x, 4, 0.25), 1.75, 1e-15); /* 1 + 0.75 (2 - 1) */
    ck_assert_double_eq_tol(tf_stats_quantile_sorted(x, 4, 0.9), 6.8, 1e-14);   /* 4 + 0.7 (8 - 4) */
    double odd[] = {5, -1, 3};
    ck_assert_double_eq(tf_stats_median(odd, 3), 3);
    double even[] = {10, -2, 7, 1};
    ck_assert_double_eq(tf_stats_median(even, 4), 4); /* (1 + 7) / 2 */
    double one[] = {42};
    ck_assert_double_eq(tf_stats_median(one, 1), 42);
    double a = 1, b = 2;
    ck_assert_int_lt(tf_stats_cmp_double(&a, &b), 0);
    ck_assert_int_gt(tf_stats_cmp_double(&b, &a), 0);
    ck_assert_int_eq(tf_stats_cmp_double(&a, &a), 0);
    double inf[] = {INFINITY, -INFINITY, 0};
    tf_stats_sort(inf, 3);
    ck_assert(inf[0] == -INFINITY && inf[1] == 0 && inf[2] == INFINITY);
}
END_TEST

/* RFC 3629 section 4 and its examples (section 7): the boundaries of each rule. */
START_TEST(utf8_sequences)
{
    struct {
        const char *s;
        size_t len;
    } good[] = {
        {"A", 1},
        {"\xC2\x80", 2},             /* U+0080, the smallest two-byte form */
        {"\xDF\xBF", 2},             /* U+07FF */
        {"\xE0\xA0\x80", 3},         /* U+0800 */
        {"\xED\x9F\xBF", 3},         /* U+D7FF, just below the surrogates */
        {"\xEE\x80\x80", 3},         /* U+E000, just above */
        {"\xF0\x90\x80\x80", 4},     /* U+10000 */
        {"\xF4\x8F\xBF\xBF", 4},     /* U+10FFFF, the last code point */
    };
    for (size_t i = 0; i < sizeof good / sizeof good[0]; i++) {
        ck_assert_uint_eq(tf_utf8_seq((const unsigned char *)good[i].s, SIZE_MAX), good[i].len);
        ck_assert_uint_eq(tf_utf8_bad_at(good[i].s, good[i].len), good[i].len);
        /* cut short: invalid */
        ck_assert_uint_eq(tf_utf8_seq((const unsigned char *)good[i].s, good[i].len - 1 ? good[i].len - 1 : 1),
                          good[i].len == 1 ? 1 : 0);
    }
    const char *bad[] = {
        "\x80",             /* a lone continuation byte */
        "\xC0\xAF",         /* overlong '/' */
        "\xC1\xBF",         /* overlong */
        "\xE0\x9F\xBF",     /* overlong three-byte form */
        "\xED\xA0\x80",     /* U+D800, a surrogate */
        "\xF0\x8F\xBF\xBF", /* overlong four-byte form */
        "\xF4\x90\x80\x80", /* U+110000, above the last code point */
        "\xF5\x80\x80\x80", /* no such lead byte */
        "\xFF",
        "\xC3",             /* cut by the end of the string: the NUL is no continuation */
        "\xE2\x82",
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++)
        ck_assert_uint_eq(tf_utf8_seq((const unsigned char *)bad[i], SIZE_MAX), 0);
    const char *text = "caf\xC3\xA9 \xE2\x82\xAC ok \xC3(";
    ck_assert_uint_eq(tf_utf8_bad_at(text, strlen(text)), 13);
    ck_assert_uint_eq(tf_utf8_bad_at(text, 12), 12);
    /* A sequence cut by len is bad where it starts, even when more bytes follow in memory. */
    ck_assert_uint_eq(tf_utf8_bad_at("x\xC3\xA9", 2), 1);
}
END_TEST

START_TEST(path_dir_of)
{
    struct {
        const char *path, *dir;
    } cases[] = {
        {"out/a.xlsx", "out"}, {"/tmp/x/y.csv", "/tmp/x"}, {"a.csv", "."},
        {"/a.csv", "/"},       {"./a.csv", "."},          {"d/", "d"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        char *d = tf_path_dir(cases[i].path);
        ck_assert_ptr_nonnull(d);
        ck_assert_str_eq(d, cases[i].dir);
        free(d);
    }
}
END_TEST

/* One folder rule for every command (util/path.h): safe names, unique without regard to case in
 * file order, and never the name of a file that sits beside the folders. */
START_TEST(path_folder_names)
{
    const char *labels[] = {"Site A", "site a", "pond/3", "summary.csv", "north.XLSX", "north"};
    const char *want[] = {"Site_A", "site_a-2", "pond_3", "summary.csv_", "north.XLSX_", "north"};
    char *out[6] = {0};
    ck_assert(tf_path_folder_names(labels, 6, out));
    for (size_t i = 0; i < 6; i++) {
        ck_assert_str_eq(out[i], want[i]);
        free(out[i]);
    }
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("helpers");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, buf_grows_by_doubling_and_keeps_contents);
    tcase_add_test(tc, buf_refuses_overflow_and_leaves_the_array);
    tcase_add_test(tc, stats_quantiles_and_median);
    tcase_add_test(tc, utf8_sequences);
    tcase_add_test(tc, path_dir_of);
    tcase_add_test(tc, path_folder_names);
    suite_add_tcase(s, tc);
    return s;
}
