/* Shared scaffolding for the Check unit tests: each test file includes this header first and
 * defines make_suite(); the header supplies main(). */
#ifndef TF_TEST_H
#define TF_TEST_H

#include <check.h>
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

/* Path of a file under tests/data, relative to the repository root (tests run from there). */
#define TF_TEST_DATA(rel) ("tests/data/" rel)

#endif
