/* Shared scaffolding for the Check unit tests: each test file includes this header first and
 * defines make_suite(); the header supplies main(). */
#ifndef TF_TEST_H
#define TF_TEST_H

#include <check.h>
#include <stdio.h>
#include <stdlib.h>

static Suite *make_suite(void);

int main(void)
{
    SRunner *sr = srunner_create(make_suite());
    srunner_run_all(sr, CK_NORMAL);
    int failed = srunner_ntests_failed(sr);
    srunner_free(sr);
    return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}

/* Set by `make valgrind` (tests/run-all), where everything runs some 50 times slower on one core. */
static inline int tf_test_valgrind(void)
{
    const char *v = getenv("TF_VALGRIND");
    return v && *v;
}

/* Adds the test t to tc, except under valgrind, where it says that it leaves it out. For
 * statistical checks that need long runs to have any power: memcheck looks for memory errors,
 * and the other cases reach the same code with short runs. */
#define TF_ADD_STATISTICAL_TEST(tc, t)                                                               \
    do {                                                                                           \
        if (tf_test_valgrind())                                                                    \
            fprintf(stderr, "%s: left out under valgrind (a statistical check that needs long runs)\n", #t); \
        else                                                                                       \
            tcase_add_test(tc, t);                                                                 \
    } while (0)

/* Path of a file under tests/data, relative to the repository root (tests run from there). */
#define TF_TEST_DATA(rel) ("tests/data/" rel)

#endif
