/* libFuzzer target for model files (tf_model_file_parse, inih): any text must either fail with
 * at least one message or give a model file whose priors, applied to every joined model
 * (tf_model_file_apply), are usable: draws inside the support, finite log density there, no NaN.
 * A broken promise aborts, which the fuzzer reports like a crash. Built and run by
 * tests/fuzz/run.sh. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "model/model.h"
#include "model/model_file.h"
#include "model/prior.h"
#include "util/rng.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

#define REQUIRE(cond)    \
    do {                 \
        if (!(cond))     \
            abort();     \
    } while (0)

/* Model files are read whole (at most 1 MiB); longer inputs only slow the fuzzer down. */
#define MAX_INPUT (64 * 1024)

static void check_prior(const tf_prior *p, tf_rng *rng)
{
    char text[256];
    tf_prior_describe(p, text, sizeof text);
    REQUIRE(!isnan(p->lower) && !isnan(p->upper) && p->lower < p->upper);
    for (int k = 0; k < 4; k++) {
        double x = tf_prior_draw(p, rng);
        REQUIRE(x >= p->lower && x <= p->upper);
        REQUIRE(!isnan(tf_prior_log_density(p, x)));
        double c = tf_prior_cdf(p, x);
        REQUIRE(c >= 0 && c <= 1);
    }
    double m = tf_prior_quantile(p, 0.5);
    REQUIRE(m >= p->lower && m <= p->upper);
}

/* Applies mf to the joined model g+o: a failure must say why, a success leaves usable priors. */
static void apply_to(const tf_model_file *mf, const char *g, const char *o, double median, tf_rng *rng)
{
    tf_error err;
    tf_error_init(&err);
    tf_model *m = NULL;
    REQUIRE(tf_model_new(g, o, &m, &err) == TF_OK);
    size_t n = tf_model_n_params(m);
    const char *names[TF_MAX_PARAMS];
    double lo[TF_MAX_PARAMS], hi[TF_MAX_PARAMS];
    for (size_t i = 0; i < n; i++) {
        names[i] = tf_model_param_name(m, i);
        lo[i] = tf_model_param_lower(m, i);
        hi[i] = tf_model_param_upper(m, i);
    }
    tf_prior_set *set = NULL;
    REQUIRE(tf_prior_set_new(n, names, lo, hi, &set, &err) == TF_OK);
    tf_model_file_check_names(mf, names, n, &err);
    tf_error_init(&err);
    tf_status st = tf_model_file_apply(mf, median, set, &err);
    REQUIRE(st == TF_OK ? err.n_items == 0 : err.n_items >= 1);
    for (size_t i = 0; i < n; i++) {
        const tf_prior *p = tf_prior_set_prior(set, i);
        if (!p)
            continue;
        REQUIRE(p->lower >= lo[i] && p->upper <= hi[i]);
        check_prior(p, rng);
    }
    tf_prior_set_free(set);
    tf_model_free(m);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size > MAX_INPUT)
        return 0;
    char *text = malloc(size + 1);
    if (!text)
        return 0;
    memcpy(text, data, size);
    text[size] = '\0';
    tf_error err;
    tf_error_init(&err);
    tf_model_file *mf = NULL;
    tf_status st = tf_model_file_parse(text, "fuzz.ini", &mf, &err);
    free(text);
    if (st != TF_OK) {
        REQUIRE(mf == NULL && err.n_items >= 1);
        return 0;
    }
    REQUIRE(mf != NULL);
    REQUIRE(tf_model_file_name(mf) && tf_model_file_name(mf)[0]);
    REQUIRE(tf_model_file_description(mf) != NULL);
    for (size_t i = 0; i < tf_model_file_n_params(mf); i++)
        REQUIRE(tf_model_file_has(mf, tf_model_file_param_at(mf, i)));
    uint64_t key = tf_rng_key("fuzz");
    tf_rng rng;
    tf_rng_derive(&rng, 1, &key, 1);
    /* Every joined model, without and with a survey median (survey-scaled priors need one). */
    for (size_t g = 0; g < tf_model_n_growth(); g++)
        for (size_t o = 0; o < tf_model_n_obs(); o++) {
            const char *gn = tf_model_growth_at(g)->name, *on = tf_model_obs_at(o)->name;
            apply_to(mf, gn, on, NAN, &rng);
            apply_to(mf, gn, on, 350.0, &rng);
        }
    tf_model_file_free(mf);
    return 0;
}
