/* The result of fitting one model to one population by PMMH: the kept draws of every chain on
 * the natural scale, the log-likelihood estimate and latent log-abundance path held with each
 * draw, and the summaries computed from them (parameters with R-hat and effective sample sizes,
 * abundance per year, average annual change). Later stages (model comparison, projection,
 * export) read it through these accessors only. */
#ifndef TF_FIT_H
#define TF_FIT_H

#include <stddef.h>
#include <stdint.h>

#include "model/model.h"
#include "sampler/posterior.h"
#include "filter/filter.h"
#include "survey/series.h"
#include "util/error.h"

typedef struct tf_fit tf_fit;

/* The most chains one fit holds. */
#define TF_FIT_MAX_CHAINS 64

/* Thresholds of the convergence warning: R-hat above 1.01 or bulk/tail ESS below 400
 * (Vehtari, Gelman, Simpson, Carpenter & Buerkner 2021, Bayesian Analysis 16:667, section 4). */
#define TF_FIT_RHAT_MAX 1.01
#define TF_FIT_ESS_MIN 400.0

/* Summary of one parameter over all kept draws of all chains. */
typedef struct {
    double mean, sd;
    double q025, q50, q975;   /* 2.5 %, 50 %, 97.5 % quantiles */
    double rhat;              /* rank-normalised split R-hat */
    double ess_bulk, ess_tail;
    double mcse_mean;         /* Monte Carlo standard error of the mean: sd / sqrt(ESS of the
                               * draws themselves), diagnostics.h */
} tf_fit_param_summary;

/* Posterior of the true abundance N = exp(x) in one year of the series (surveyed or not). */
typedef struct {
    int year;
    double count;             /* NAN when the year was not surveyed */
    double effort;
    double median, q25, q75, q025, q975;
    /* Split R-hat and bulk / tail ESS of the log-abundance, for the first and the last year
     * only (the ones the stopping rule watches, tf_fit_meets); NaN for the years between. */
    double rhat, ess_bulk, ess_tail;
} tf_fit_year_summary;

/* The trend over years first_year..last_year: per draw exp(b) - 1, with b the least-squares slope
 * of the latent log-abundance on the year over every year of the period (tf_stats_slope), so
 * that every year counts and not only the two ends: a fraction per year (-0.02 = 2 % decline a
 * year). */
typedef struct {
    int first_year, last_year;
    double mean, median, q025, q975;
    double p_decline;         /* share of draws with a negative slope */
    double rhat, ess_bulk;
} tf_fit_trend_summary;

/* Years of the recent trend by default: about three generations of a long-lived waterbird, and
 * ten years is the window of the IUCN Red List criterion A (IUCN Standards and Petitions
 * Committee 2022, Guidelines for Using the IUCN Red List Categories and Criteria, version 15.1,
 * section 4.4: "10 years or three generations, whichever is the longer"; recalled from memory). */
#define TF_FIT_RECENT_YEARS 10

/* ---- Building (the sampler does this) ---- */

/* An empty result for n_chains chains (1 .. TF_FIT_MAX_CHAINS) with room for n_iter kept draws
 * each, all of them counted as kept (tf_fit_set_n_iter counts fewer), for model m and series s
 * (borrowed: they must outlive the result). NULL when out of memory or a size is out of range. */
tf_fit *tf_fit_alloc(const tf_model *m, const tf_series *s, size_t n_chains, size_t n_iter);
void tf_fit_free(tf_fit *f);   /* accepts NULL */

/* Stores draw iter of chain: theta (n_params values, natural scale), its log-likelihood
 * estimate and its latent path (n_years log-abundances; NULL leaves the path as NAN). Copies. */
void tf_fit_record(tf_fit *f, size_t chain, size_t iter, const double *theta, double loglik,
                   const double *path);

/* Keeps every second kept draw of each chain (draws 1, 3, 5, ...) at the front of the chain's
 * block and returns how many that is per chain, floor(n_iter / 2), which becomes n_iter: the
 * chain can then go on at twice the thinning in the same storage, recording draws from that
 * index on, and ends with the draws a run thinned twice as much from the start would have kept.
 * The summaries are stale until the next tf_fit_summarise. */
size_t tf_fit_halve(tf_fit *f);

/* Counts the first n_iter (>= 1, at most the room given to tf_fit_alloc) draws of each chain as
 * the kept ones, so that a run can summarise its draws so far and record more after them.
 * Summaries are stale until the next tf_fit_summarise. */
void tf_fit_set_n_iter(tf_fit *f, size_t n_iter);

/* Moves the kept draws together and gives the unused room back, so that the whole-block
 * accessors (tf_fit_draws, tf_fit_logliks, tf_fit_paths) see n_chains * n_iter draws in
 * chain-major order. tf_pmmh_run returns its fits compacted; nothing can be recorded after. */
void tf_fit_compact(tf_fit *f);

/* Per-chain sampler facts: acceptance rate over the kept draws and the share of proposals
 * rejected because the likelihood estimate was not finite. */
void tf_fit_set_chain_stats(tf_fit *f, size_t chain, double acceptance, double invalid);

/* How the draws were made: warm-up length, thinning, particle count, the measured spread of the
 * log-likelihood estimator at that count (root mean square of its SD over the tuning points,
 * tune.h; for the correlated method the SD of the log-ratio of successive estimates), method,
 * seed, and wall-clock seconds. */
typedef struct {
    size_t n_warmup;
    size_t n_iterations;      /* iterations per chain after the warm-up (pmmh.h: run by need) */
    size_t thin;              /* iterations per kept draw at the end */
    size_t n_doublings;       /* times the thinning was doubled to keep the kept draws bounded */
    int stopped_early;        /* the stopping rule ended the run before its maximum length */
    size_t n_particles;
    double loglik_sd;
    int correlated;
    double rho;
    int delayed;              /* delayed acceptance was on (pmmh.h) */
    double screened;          /* share of the kept draws' proposals the screen rejected */
    tf_proposal proposal;     /* how the particle filter moved (filter.h) */
    uint64_t seed;
    double seconds;
} tf_fit_settings;
void tf_fit_set_settings(tf_fit *f, const tf_fit_settings *st);

/* The posterior (model, priors, transforms) the draws come from; borrowed, it must outlive the
 * result. tf_pmmh_run sets it; NULL until set. */
void tf_fit_set_posterior(tf_fit *f, const tf_posterior *post);

/* Computes every summary from the recorded draws, after the last tf_fit_record (again after
 * tf_fit_halve and more records).
 * Errors: TF_ERR_NOMEM (the result keeps its draws; summaries stay unset). */
tf_status tf_fit_summarise(tf_fit *f, tf_error *err);

/* The length of the recent trend's period, the last n years of the series (0: TF_FIT_RECENT_YEARS);
 * the whole series when it is shorter. Summaries are stale until the next tf_fit_summarise. */
void tf_fit_set_recent_years(tf_fit *f, size_t n);

/* ---- Reading ---- */

const tf_model *tf_fit_model(const tf_fit *f);
const tf_series *tf_fit_series(const tf_fit *f);
const tf_posterior *tf_fit_posterior(const tf_fit *f);   /* priors: tf_posterior_priors */
const tf_fit_settings *tf_fit_settings_of(const tf_fit *f);
size_t tf_fit_n_chains(const tf_fit *f);
size_t tf_fit_n_iter(const tf_fit *f);        /* kept draws per chain */
size_t tf_fit_n_draws(const tf_fit *f);       /* n_chains * n_iter */
size_t tf_fit_n_params(const tf_fit *f);
size_t tf_fit_n_years(const tf_fit *f);
const char *tf_fit_param_name(const tf_fit *f, size_t param);

/* Draw iter of chain: n_params values in model order (natural scale). Borrowed. */
const double *tf_fit_draw(const tf_fit *f, size_t chain, size_t iter);
double tf_fit_loglik(const tf_fit *f, size_t chain, size_t iter);
/* Latent log-abundance path held with that draw: n_years values. Borrowed. */
const double *tf_fit_path(const tf_fit *f, size_t chain, size_t iter);

/* The same as whole blocks, draw k = chain * n_iter + iter (chain-major): draws is
 * n_draws x n_params row-major (the layout tf_project_input takes), logliks n_draws values,
 * paths n_draws x n_years row-major. Borrowed. Only for a compacted fit (tf_fit_compact), as
 * every fit of tf_pmmh_run is, or one whose every allocated draw is kept. */
const double *tf_fit_draws(const tf_fit *f);
const double *tf_fit_logliks(const tf_fit *f);
const double *tf_fit_paths(const tf_fit *f);
/* Copies the latent log-abundance of year year_index of every draw into out (n_draws values),
 * e.g. the last year's as the start of projections. */
void tf_fit_year_draws(const tf_fit *f, size_t year_index, double *out);

double tf_fit_acceptance(const tf_fit *f, size_t chain);
double tf_fit_invalid_share(const tf_fit *f, size_t chain);

/* Summaries; valid after tf_fit_summarise. Borrowed. */
const tf_fit_param_summary *tf_fit_param(const tf_fit *f, size_t param);
const tf_fit_year_summary *tf_fit_year(const tf_fit *f, size_t year_index);
const tf_fit_trend_summary *tf_fit_trend(const tf_fit *f);
/* The trend over the last years of the series (tf_fit_set_recent_years). */
const tf_fit_trend_summary *tf_fit_trend_recent(const tf_fit *f);
/* 1 when every parameter, and the log-abundance of the first and the last year, has R-hat <=
 * rhat_max and bulk and tail ESS >= ess_min; 0 otherwise or before tf_fit_summarise. */
int tf_fit_meets(const tf_fit *f, double rhat_max, double ess_min);
/* The same test from the draws as they are, without the summaries: diagnoses only the parameters
 * and the first and last year's log-abundance, and stops at the first that fails, so that a run
 * by need can look often (pmmh.c). *pass is 1 when every one passes (0 with fewer than
 * TF_DIAG_MIN_ITER draws per chain). Errors: TF_ERR_NOMEM (*pass 0). */
tf_status tf_fit_check(const tf_fit *f, double rhat_max, double ess_min, int *pass, tf_error *err);

/* tf_fit_meets with the thresholds of the convergence warning, TF_FIT_RHAT_MAX and
 * TF_FIT_ESS_MIN. */
int tf_fit_converged(const tf_fit *f);

/* The health of a fit in a few numbers, for every table and message that shows it: the worst
 * R-hat and smallest ESS over the parameters, and the acceptance over the chains.
 *
 * The NaN rule. A parameter's R-hat or ESS is NaN when its draws cannot be diagnosed
 * (diagnostics.c): chains shorter than TF_DIAG_MIN_ITER, draws that are not finite, a parameter
 * that never moved (zero variance: a constant parameter, or chains that accepted nothing), or
 * chains so sticky that the autocorrelation estimate breaks down, which shows first in the tail
 * ESS. Such a parameter is not known to be mixed, so NaN ranks worse than any number: one NaN makes the worst R-hat (or
 * the smallest ESS) NaN, and every threshold test written as !(max_rhat <= TF_FIT_RHAT_MAX)
 * or !(min_ess >= TF_FIT_ESS_MIN) flags it. It is shown as NaN (an empty cell), never as a
 * made-up infinity or zero; n_undiagnosed says how many parameters it came from. */
typedef struct {
    double max_rhat;          /* largest R-hat over the parameters (NaN rule above) */
    double min_bulk_ess;      /* smallest bulk ESS over the parameters */
    double min_tail_ess;      /* smallest tail ESS over the parameters */
    double min_ess;           /* the smaller of those two */
    size_t n_undiagnosed;     /* parameters whose R-hat, bulk or tail ESS is NaN */
    double mean_acceptance;   /* acceptance rate, mean over the chains */
    double min_acceptance;    /* lowest acceptance rate of any chain */
    double mean_invalid;      /* share of proposals with a non-finite likelihood, mean over chains */
    int converged;            /* tf_fit_converged: also watches the first and last year */
} tf_fit_health_summary;

/* The health summary of f; valid after tf_fit_summarise (before it, as tf_fit_meets, it is not
 * converged and its R-hat and ESS are whatever the unset summaries hold). */
tf_fit_health_summary tf_fit_health(const tf_fit *f);

#endif
