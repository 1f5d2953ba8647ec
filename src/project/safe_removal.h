/* The largest safe removal: the largest constant yearly removal (animals, or a share of the
 * population) whose chance of falling to the quasi-extinction threshold within a number of years
 * stays at or below a given risk, found by bisection over projections that share their random
 * numbers, with its Monte Carlo error from independent batches of runs. A model-based figure
 * under the model's assumptions; a quota is a decision for the responsible authority. */
#ifndef TF_SAFE_REMOVAL_H
#define TF_SAFE_REMOVAL_H

#include <stddef.h>

#include "project/project.h"
#include "util/error.h"
#include "util/rng.h"

/* Batches of runs for the Monte Carlo error: each batch is bisected on its own and the error is
 * the sd of the batch answers over sqrt(batches) (the method of batch means; 10 batches is
 * common practice, no source: enough for an sd, each batch still holds a tenth of the runs). */
#define TF_SAFE_REMOVAL_BATCHES 10
/* Bisection steps: 40 halvings bring any bracket to 1e-12 of its width, far below the Monte
 * Carlo error. */
#define TF_SAFE_REMOVAL_STEPS 40

/* What --safe-removal RISK,YEARS[,count|share] asks; years 0 = not asked. */
typedef struct {
    double risk;   /* in (0, 1) */
    size_t years;  /* 1..TF_PROJECT_MAX_HORIZON */
    int share;     /* 1: a share of the population a year; 0: animals a year */
} tf_safe_removal_ask;

/* Parses "RISK,YEARS[,count|share]": RISK a fraction in (0, 1) or a percentage ("5%"), YEARS a
 * whole number of years 1..TF_PROJECT_MAX_HORIZON, count (the default) or share. TF_ERR_PARSE or
 * TF_ERR_RANGE naming the bad part. */
/* What a command says when --safe-removal is given twice: one largest safe removal is sought per
 * run. */
#define TF_SAFE_REMOVAL_TWICE "--safe-removal is given twice (one largest safe removal is sought per run)"
tf_status tf_safe_removal_parse(const char *text, tf_safe_removal_ask *out, tf_error *err);

typedef struct {
    tf_safe_removal_ask ask;
    tf_threshold threshold;      /* the first threshold of the projection */
    double value;                /* the largest safe removal: animals a year, or a share */
    double mcse;                 /* its Monte Carlo error (batches) */
    double risk_at_value;        /* the risk within ask.years at value, over every run */
    double risk_at_value_mcse;   /* binomial, tf_project_se */
    double risk_at_zero;         /* the risk with no removal (status quo releases dropped too) */
    int exceeded_at_zero;        /* 1: the risk exceeds ask.risk even with no removal (value 0) */
    size_t n_runs;
    double batch[TF_SAFE_REMOVAL_BATCHES];
} tf_safe_removal;

/* Finds the largest safe removal for the futures of inputs under base (its first threshold is the
 * quasi-extinction threshold; thresholds must not be empty), each projection from a copy of
 * stream (common random numbers: the risk then moves with the removal alone, monotone wherever
 * the growth model's map is). The removal acts in every step from the first projected year on
 * and replaces the status quo's; q is the counted fraction (animals to count units). Batches are
 * the runs i with i mod TF_SAFE_REMOVAL_BATCHES = b, so each sees every draw alike. The answer is
 * the bisection over every run; a removal of 0 when the risk exceeds ask.risk already without
 * one (exceeded_at_zero). TF_ERR_INVALID without a threshold, the projection's errors otherwise. */
tf_status tf_safe_removal_find(const tf_project_input *inputs, size_t n_inputs, const tf_project_options *base,
                               const tf_rng *stream, const tf_safe_removal_ask *ask, double q, tf_safe_removal *out,
                               tf_error *err);

#endif
