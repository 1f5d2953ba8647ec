/* libFuzzer target for the survey importer (tf_survey_parse): any byte string must give either a
 * survey that keeps every promise of survey.h or a failure with at least one message, never a
 * crash, a sanitizer report or a leak. The batch reading (tf_survey_parse_batch) must agree: the
 * same failure where it fails, the same populations where the strict reading succeeds, and
 * otherwise clean populations beside set-aside ones that account for every population. A broken promise aborts, which the fuzzer reports like a
 * crash. Built and run by tests/fuzz/run.sh. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "survey/survey.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

#define REQUIRE(cond)    \
    do {                 \
        if (!(cond))     \
            abort();     \
    } while (0)

static void check_series(const tf_series *s)
{
    size_t n = tf_series_n_years(s);
    int first = tf_series_first_year(s);
    REQUIRE(n >= 1 && n <= TF_SURVEY_MAX_SPAN);
    REQUIRE(first >= TF_SURVEY_YEAR_MIN && first + (long)n - 1 <= TF_SURVEY_YEAR_MAX);
    REQUIRE(strlen(tf_series_label(s)) <= TF_SURVEY_MAX_LABEL);
    const double *c = tf_series_counts(s), *e = tf_series_effort(s);
    size_t surveyed = 0, positive = 0;
    for (size_t i = 0; i < n; i++) {
        REQUIRE(e[i] > 0 && isfinite(e[i]));
        if (isnan(c[i]))
            continue;
        REQUIRE(c[i] >= 0 && c[i] <= TF_SURVEY_MAX_COUNT && !signbit(c[i]));
        REQUIRE(c[i] == floor(c[i])); /* read without --estimates: whole counts only */
        REQUIRE(tf_series_source_line(s, i) > 0);
        surveyed++;
        positive += c[i] > 0;
    }
    /* The first and last year listed are surveyed or at least listed: a listed row has a line. */
    REQUIRE(tf_series_source_line(s, 0) > 0 && tf_series_source_line(s, n - 1) > 0);
    REQUIRE(surveyed == tf_series_n_surveyed(s) && surveyed >= TF_SURVEY_MIN_SURVEYED);
    REQUIRE(positive >= 1);
}

/* The batch reading of the same bytes, against the strict outcome st / strict (may be NULL). */
static void check_batch(const uint8_t *data, size_t size, tf_status st, const tf_error *strict_err,
                        const tf_survey *strict)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    tf_status bs = tf_survey_parse_batch("fuzz.csv", (const char *)data, size, 0, &sv, &err);
    if (bs != TF_OK) {
        REQUIRE(sv == NULL && st == bs && err.n_items == strict_err->n_items);
        return;
    }
    size_t n = tf_survey_n_series(sv), nr = tf_survey_n_rejected(sv);
    if (st == TF_OK) {
        REQUIRE(nr == 0 && n == tf_survey_n_series(strict));
    } else {
        /* The strict reading's first problem is the first problem of a population set aside
         * (when no message was dropped, so that its first one is the file's first). */
        REQUIRE(nr >= 1);
        int found = strict_err->n_dropped > 0;
        for (size_t i = 0; i < nr && !found; i++) {
            const tf_survey_rejected *x = tf_survey_rejected_at(sv, i);
            found = x->line == strict_err->items[0].line && !strcmp(x->what, strict_err->items[0].what);
        }
        REQUIRE(found);
    }
    unsigned char seen[4096] = {0};
    for (size_t i = 0; i < n; i++) {
        check_series(tf_survey_series(sv, i));
        size_t o = tf_survey_series_order(sv, i);
        REQUIRE(o < n + nr && (o >= sizeof seen || !seen[o]++));
        REQUIRE(i == 0 || o > tf_survey_series_order(sv, i - 1));
    }
    for (size_t i = 0; i < nr; i++) {
        const tf_survey_rejected *x = tf_survey_rejected_at(sv, i);
        REQUIRE(x->order < n + nr && (x->order >= sizeof seen || !seen[x->order]++));
        REQUIRE(x->n_problems >= 1 && x->line >= 1 && x->what[0]);
    }
    REQUIRE(tf_survey_rejected_at(sv, nr) == NULL);
    tf_survey_free(sv);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    tf_status st = tf_survey_parse("fuzz.csv", (const char *)data, size, &sv, &err);
    check_batch(data, size, st, &err, sv);
    if (st != TF_OK) {
        REQUIRE(sv == NULL);
        REQUIRE(err.n_items >= 1 && err.items[0].what[0]);
        REQUIRE(st < TF_STATUS_COUNT);
        for (size_t i = 0; i < err.n_items; i++) {
            REQUIRE(err.items[i].line >= 0 && err.items[i].column >= 0);
            REQUIRE(memchr(err.items[i].what, '\0', sizeof err.items[i].what) != NULL);
            /* Messages come in line order. */
            REQUIRE(i == 0 || err.items[i - 1].line <= err.items[i].line);
        }
        return 0;
    }
    REQUIRE(sv != NULL && err.n_items == 0);
    size_t n = tf_survey_n_series(sv);
    REQUIRE(n >= 1);
    for (size_t i = 0; i < n; i++) {
        const tf_series *s = tf_survey_series(sv, i);
        REQUIRE(s != NULL);
        check_series(s);
        REQUIRE(tf_survey_find(sv, tf_series_label(s)) == s);
    }
    REQUIRE(tf_survey_series(sv, n) == NULL);
    tf_survey_free(sv);
    return 0;
}
