/* One case of a benchmark: a demo survey's population joined with a model and the default priors
 * of models/ into a posterior, the setup bench_fit, bench_evidence and bench_guided share. */
#ifndef TF_BENCH_SETUP_H
#define TF_BENCH_SETUP_H

#include "cmd/setup.h"
#include "model/model.h"
#include "sampler/posterior.h"
#include "survey/survey.h"

typedef struct {
    tf_survey *sv;         /* NULL when the series came from elsewhere */
    const tf_series *s;    /* borrowed */
    tf_model *m;
    tf_prior_set *priors;
    tf_posterior *post;
} bench_setup;

/* Joins growth and obs with the default priors on series s (borrowed). Returns 1 on success;
 * otherwise prints the error, as program who, and returns 0. Free with bench_setup_close either way. */
static inline int bench_setup_series(bench_setup *b, const tf_series *s, const char *growth, const char *obs, const char *who)
{
    tf_error err;
    tf_error_init(&err);
    b->s = s;
    if (tf_model_new(growth, obs, &b->m, &err) != TF_OK || tf_model_initial_from_series(b->m, s, &err) != TF_OK ||
        tf_setup_priors(b->m, s, NULL, &b->priors, &err) != TF_OK ||
        tf_posterior_new(b->m, b->priors, &b->post, &err) != TF_OK) {
        tf_error_print(&err, who, stderr);
        return 0;
    }
    return 1;
}

/* The same for population (NULL: the first) of the survey file. */
static inline int bench_setup_open(bench_setup *b, const char *file, const char *population, const char *growth,
                            const char *obs, const char *who)
{
    *b = (bench_setup){0};
    tf_error err;
    tf_error_init(&err);
    if (tf_survey_read(file, &b->sv, &err) != TF_OK) {
        tf_error_print(&err, who, stderr);
        return 0;
    }
    const tf_series *s = population ? tf_survey_find(b->sv, population) : tf_survey_series(b->sv, 0);
    if (!s) {
        fprintf(stderr, "%s: no population '%s' in %s\n", who, population ? population : "", file);
        return 0;
    }
    return bench_setup_series(b, s, growth, obs, who);
}

static inline void bench_setup_close(bench_setup *b)
{
    tf_posterior_free(b->post);
    tf_prior_set_free(b->priors);
    tf_model_free(b->m);
    tf_survey_free(b->sv);
    *b = (bench_setup){0};
}

#endif
