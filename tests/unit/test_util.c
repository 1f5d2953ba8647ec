/* Unit tests for the error record and the random streams. */
#include "tf_test.h"
#include <math.h>
#include <string.h>

#include "util/error.h"
#include "util/rng.h"

START_TEST(status_table_matches_enum)
{
    /* error.c holds a _Static_assert on the table length; here every status has its own name. */
    for (int s = 0; s < TF_STATUS_COUNT; s++) {
        ck_assert_str_ne(tf_strerror((tf_status)s), "unknown status");
        for (int t = 0; t < s; t++)
            ck_assert_str_ne(tf_strerror((tf_status)s), tf_strerror((tf_status)t));
    }
    ck_assert_str_eq(tf_strerror(TF_STATUS_COUNT), "unknown status");
}
END_TEST

START_TEST(error_record_caps_and_counts)
{
    tf_error err;
    tf_error_init(&err);
    ck_assert_int_eq(tf_error_status(&err), TF_OK);
    for (int i = 0; i < TF_ERROR_MAX + 5; i++)
        ck_assert_int_eq(tf_error_add(&err, TF_ERR_PARSE, "a.csv", i + 1, 2, NULL, "bad %d", i), TF_ERR_PARSE);
    ck_assert_uint_eq(err.n_items, TF_ERROR_MAX);
    ck_assert_uint_eq(err.n_dropped, 5);
    ck_assert_str_eq(err.items[3].what, "bad 3");
    ck_assert_int_eq(err.items[3].line, 4);
    char buf[8192];
    FILE *f = fmemopen(buf, sizeof buf, "w");
    tf_error_print(&err, "tallyfit", f);
    fclose(f);
    ck_assert_ptr_nonnull(strstr(buf, "tallyfit: error: a.csv:1:2: bad 0\n"));
    ck_assert_ptr_nonnull(strstr(buf, "tallyfit: (5 more errors not shown)\n"));
}
END_TEST

/* One format for every error: "prog: error: [file[:line[:column]]: ]what", then the hint. */
START_TEST(error_restatus_from_an_index)
{
    tf_error err;
    tf_error_init(&err);
    tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "first");
    size_t from = err.n_items;
    tf_error_add(&err, TF_ERR_IO, "a.ini", 3, 0, "a hint", "cannot open");
    tf_error_add(&err, TF_ERR_PARSE, "a.ini", 4, 0, NULL, "bad key");
    ck_assert_int_eq(tf_error_restatus(&err, from, TF_ERR_INVALID), TF_ERR_INVALID);
    /* The earlier message keeps its status; the later ones change status only. */
    ck_assert_int_eq(err.items[0].status, TF_ERR_USAGE);
    ck_assert_int_eq(err.items[1].status, TF_ERR_INVALID);
    ck_assert_int_eq(err.items[2].status, TF_ERR_INVALID);
    ck_assert_str_eq(err.items[1].what, "cannot open");
    ck_assert_str_eq(err.items[1].file, "a.ini");
    ck_assert_int_eq(err.items[1].line, 3);
    ck_assert_str_eq(err.items[1].hint, "a hint");
    ck_assert_int_eq(tf_error_status(&err), TF_ERR_USAGE);
    ck_assert_int_eq(tf_error_restatus(NULL, 0, TF_ERR_NOMEM), TF_ERR_NOMEM);
}
END_TEST

START_TEST(error_print_one_format)
{
    tf_error err;
    tf_error_init(&err);
    tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, "run 'tallyfit fit --help'", "unknown option '--bogus'");
    tf_error_add(&err, TF_ERR_USAGE, NULL, 0, 0, NULL, "no survey file given");
    tf_error_add(&err, TF_ERR_IO, "s.csv", 0, 0, NULL, "cannot open");
    tf_error_add(&err, TF_ERR_PARSE, "s.csv", 7, 0, NULL, "bad row");
    char buf[4096];
    FILE *f = fmemopen(buf, sizeof buf, "w");
    tf_error_print(&err, "tallyfit fit", f);
    fclose(f);
    ck_assert_str_eq(buf, "tallyfit fit: error: unknown option '--bogus'\n"
                          "  hint: run 'tallyfit fit --help'\n"
                          "tallyfit fit: error: no survey file given\n"
                          "tallyfit fit: error: s.csv: cannot open\n"
                          "tallyfit fit: error: s.csv:7: bad row\n");
    f = fmemopen(buf, sizeof buf, "w");
    tf_error_print_first(&err, 1, "tallyfit fit", f);
    fclose(f);
    ck_assert_str_eq(buf, "tallyfit fit: error: unknown option '--bogus'\n"
                          "  hint: run 'tallyfit fit --help'\n");
}
END_TEST

START_TEST(streams_reproduce_and_differ)
{
    tf_rng a, b, c;
    uint64_t k1[2] = {1, 2}, k2[2] = {1, 3};
    tf_rng_derive(&a, 42, k1, 2);
    tf_rng_derive(&b, 42, k1, 2);
    tf_rng_derive(&c, 42, k2, 2);
    int same_ab = 1, same_ac = 1;
    for (int i = 0; i < 100; i++) {
        uint64_t x = tf_rng_u64(&a), y = tf_rng_u64(&b), z = tf_rng_u64(&c);
        same_ab &= x == y;
        same_ac &= x == z;
    }
    ck_assert(same_ab);
    ck_assert(!same_ac);
}
END_TEST

/* The ziggurat's normals: mean, variance and the Kolmogorov-Smirnov distance to the normal CDF.
 * With n = 10^6: sd(mean) = 1e-3, sd(var) = sqrt(2/n) = 1.4e-3; tolerances are 5 sd. The KS
 * critical value at alpha = 0.001 is 1.949/sqrt(n) (asymptotic Kolmogorov distribution, Smirnov
 * 1948 table) = 1.95e-3. */
static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

START_TEST(normals_have_normal_distribution)
{
    enum { N = 1000000 };
    double *z = malloc(N * sizeof *z);
    ck_assert_ptr_nonnull(z);
    tf_rng r;
    uint64_t key = 7;
    tf_rng_derive(&r, 2026, &key, 1);
    tf_rng_fill_normal(&r, z, N);
    double s = 0, ss = 0;
    for (int i = 0; i < N; i++) {
        s += z[i];
        ss += z[i] * z[i];
    }
    double mean = s / N, var = ss / N - mean * mean;
    ck_assert_double_lt(fabs(mean), 5e-3);
    ck_assert_double_lt(fabs(var - 1), 5 * 1.4e-3);
    qsort(z, N, sizeof *z, cmp_double);
    double d = 0;
    for (int i = 0; i < N; i++) {
        double F = 0.5 * erfc(-z[i] / sqrt(2.0));
        double lo = F - (double)i / N, hi = (double)(i + 1) / N - F;
        d = fmax(d, fmax(lo, hi));
    }
    ck_assert_double_lt(d, 1.949 / sqrt((double)N));
    free(z);
}
END_TEST

START_TEST(gsl_view_uses_the_stream)
{
    tf_rng a, b;
    uint64_t key = 9;
    tf_rng_derive(&a, 1, &key, 1);
    b = a;
    gsl_rng view;
    tf_rng_gsl_view(&a, &view);
    double u = gsl_rng_uniform(&view);
    ck_assert_double_eq(u, tf_rng_uniform(&b));
    ck_assert(u > 0 && u < 1);
}
END_TEST

static Suite *make_suite(void)
{
    Suite *s = suite_create("util");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, status_table_matches_enum);
    tcase_add_test(tc, error_record_caps_and_counts);
    tcase_add_test(tc, error_restatus_from_an_index);
    tcase_add_test(tc, error_print_one_format);
    tcase_add_test(tc, streams_reproduce_and_differ);
    tcase_add_test(tc, normals_have_normal_distribution);
    tcase_add_test(tc, gsl_view_uses_the_stream);
    suite_add_tcase(s, tc);
    return s;
}

