/* Projection: simulates the growth model forward from parameter draws and summarises the futures as
 * abundance bands, quasi-extinction risk curves and probabilities of decline, each with its Monte
 * Carlo error. Several models can be averaged by their posterior probabilities. */
#ifndef TF_PROJECT_H
#define TF_PROJECT_H

#include <signal.h>
#include <limits.h>
#include <stddef.h>

#include "model/model.h"
#include "util/error.h"
#include "util/rng.h"

/* Defaults (common practice, no source: long enough to show the trend, short enough to stay
 * within reach of a model fitted to a few decades of counts). */
#define TF_PROJECT_DEFAULT_HORIZON 50
#define TF_PROJECT_DEFAULT_RUNS 4000
/* The decline window that is always reported, in years. */
#define TF_PROJECT_BASE_WINDOW 10
#define TF_PROJECT_MAX_THRESHOLDS 16
#define TF_PROJECT_MAX_DECLINES 8
#define TF_PROJECT_MAX_HORIZON 1000
/* The most models one projection averages over. */
#define TF_PROJECT_MAX_INPUTS 64
/* Log-abundance is kept within [-50, 50]: e^50 = 5e21 animals is far above any real population and
 * e^-50 = 2e-22 is zero for every purpose, so the bounds only stop exp() overflow and the
 * inf - inf / 0 * inf that an overshooting drift (theta-logistic with a large theta, Gompertz with
 * a strong negative feedback) would otherwise produce. A run at a bound stays a valid number. */
#define TF_PROJECT_LOG_MAX 50.0
#define TF_PROJECT_LOG_MIN (-50.0)

/* The calendar year of a projection's year 0 when it is not known (a projection from given
 * values without a survey): the tables then leave the year cells empty. */
#define TF_PROJECTION_NO_YEAR INT_MIN

/* A quasi-extinction threshold: an absolute abundance (relative == 0, value > 0 animals), or a
 * fraction of each run's starting abundance (relative == 1, 0 < value <= 1; "20%" is 0.2). */
typedef struct {
    double value;
    int relative;
} tf_threshold;

/* Parses a comma-separated list such as "50,100,20%" into out[0..max). Stores the number found in
 * *n_out. TF_ERR_PARSE for text that is not a number, TF_ERR_RANGE for values <= 0, percentages
 * above 100 % or more than max entries; err names the offending entry. */
tf_status tf_project_parse_thresholds(const char *text, tf_threshold *out, size_t max, size_t *n_out,
                                      tf_error *err);

/* Writes "50" or "20%" into buf (always NUL-terminated); returns buf. */
char *tf_project_threshold_label(const tf_threshold *t, char *buf, size_t size);

/* One model's share of the projection. Everything is borrowed for the duration of the call.
 * draws holds n_draws rows of n_params values each (row-major, natural scale) in the joined model's
 * order: the growth model's drift parameters first (so a row is handed to growth->drift as is),
 * the process-noise sd at sigma_index, then anything else (ignored). x_last[d] is draw d's
 * log-abundance in the last survey year: the start of its futures. weight >= 0 is the model's
 * posterior probability (any positive scale; the weights are normalised). */
typedef struct {
    const tf_growth_type *growth;
    size_t sigma_index;
    size_t n_params;
    size_t n_draws;
    const double *draws;
    const double *x_last;
    double weight;
} tf_project_input;

/* The input for draws of the joined model m: growth model, sigma index and row length taken from
 * m, so that rows in m's parameter order (drift parameters, sigma, counting-error parameters; the
 * last are ignored and may be NAN) are used as they are. draws (n_draws x tf_model_n_params(m))
 * and x_last (n_draws) are borrowed and must outlive the tf_project_run call; m only needs to
 * live through this call. */
tf_project_input tf_project_input_from_model(const tf_model *m, const double *draws, size_t n_draws,
                                             const double *x_last, double weight);

/* What management does in each yearly step, between the count of one year and the growth into
 * the next (the order of the fit's step, model/model.h): first a share of the animals is removed
 * (x <- x + ln(1 - share)), then a net take in count units (tf_model_take: removed minus released
 * animals times the counted fraction), then the growth model moves what is left, with its
 * carrying capacity K times capacity and growth added to the year's log growth:
 * x <- drift(x; K capacity) + growth + sigma eps. A run taken to zero stays extinct
 * (tf_model_drift_alive) until a release brings it back. The zero action (every field 0) changes
 * nothing; capacity 0 means 1. */
typedef struct {
    double share;    /* in [0, 1) */
    double take;     /* count units a year; negative: released */
    double growth;   /* added to the yearly log growth */
    double capacity; /* factor on K (> 0; 0 = unchanged); only for a growth model with a K */
} tf_project_action;

/* 1 when a changes nothing. */
int tf_project_action_is_zero(const tf_project_action *a);

/* The index of the carrying capacity "K" among g's drift parameters, or -1 when it has none
 * (the exponential model). */
int tf_project_capacity_index(const tf_growth_type *g);

typedef struct {
    size_t horizon;        /* years ahead, 1..TF_PROJECT_MAX_HORIZON */
    size_t n_runs;         /* simulated futures; 0 = max(TF_PROJECT_DEFAULT_RUNS, draws of the inputs
                            * with positive weight) */
    size_t n_thresholds;   /* 0..TF_PROJECT_MAX_THRESHOLDS */
    tf_threshold thresholds[TF_PROJECT_MAX_THRESHOLDS];
    size_t n_declines;     /* 0..TF_PROJECT_MAX_DECLINES, each in (0, 1) */
    double declines[TF_PROJECT_MAX_DECLINES];
    size_t decline_window; /* extra window in years (e.g. three generations); 0 = none */
    /* > 0: every run starts from this abundance instead of its draw's x_last, for what-if
     * questions that keep the parameter uncertainty but set the current abundance by hand
     * (x_last is then not read). 0 = each draw's own start. */
    double start;
    /* The status quo's action in every step before action_from, and in every step when
     * action_from is 0 (only its take may be nonzero: a survey's recorded removals continued);
     * the action of a scenario in steps t >= action_from (t = 1 is the step from the last survey
     * year into the next). All zero: the plain projection, bit for bit as without them. */
    tf_project_action status_quo;
    tf_project_action action;
    size_t action_from;
    /* 1: keep each run's first year at or below each threshold and its change over each decline
     * window, for the paired differences of two projections made with the same random numbers
     * (tf_projection_risk_difference); about (2 n_thresholds + 16) bytes a run. */
    int keep_runs;
    /* Polled once per simulated year; when it reads nonzero the run stops with
     * TF_ERR_INTERRUPTED. NULL = never (a signal handler's flag, for Ctrl-C). */
    const volatile sig_atomic_t *stop;
} tf_project_options;

/* Defaults: horizon 50, n_runs 0 (see above), no thresholds, declines of 30, 50 and 80 %
 * (common practice, no source: the steps of decline used by most status schemes), no extra
 * window, each draw's own start. */
void tf_project_options_init(tf_project_options *o);

typedef struct tf_projection tf_projection;

/* Simulates opts->n_runs futures and summarises them.
 *
 * Runs are shared among the inputs in proportion to their weights by largest remainder (Hamilton's
 * method: floor of each quota, then one more run to the largest fractional parts, ties to the
 * earlier input), so a single input of positive weight receives every run and gives bit-for-bit
 * the projection it gives alone. Within an input, draw d receives runs
 * [floor(d R / D), floor((d+1) R / D)) of its R runs: with R >= D this cycles through the draws,
 * each used floor(R/D) or ceil(R/D) times; with R < D it takes an evenly spaced subset.
 *
 * Each year every run moves by x <- drift(x; theta) + sigma * eps, eps ~ N(0, 1) from rng, with the
 * drift applied to the block of runs that share a draw (one call per draw and year); x is then
 * kept within [TF_PROJECT_LOG_MIN, TF_PROJECT_LOG_MAX]. The simulation runs to
 * max(horizon, decline windows).
 *
 * On success stores a new result in *out (free with tf_projection_free). TF_ERR_RANGE / TF_ERR_INVALID
 * for bad options, weights, draws (non-finite, outside the growth model's support, sigma < 0) or
 * starts (x_last, or log(opts->start)) outside the log-abundance bounds; TF_ERR_NUMERIC if the drift returns a non-number;
 * TF_ERR_INTERRUPTED once *opts->stop reads nonzero; TF_ERR_NOMEM. On failure *out is NULL; rng has
 * advanced by an unspecified amount. */
tf_status tf_project_run(const tf_project_input *inputs, size_t n_inputs, const tf_project_options *opts,
                         tf_rng *rng, tf_projection **out, tf_error *err);

/* The checks tf_project_run makes of its options (horizon, runs, thresholds, declines, window,
 * start), for callers that refuse bad settings before long work that comes first. TF_OK, or
 * TF_ERR_RANGE naming the first bad setting. */
tf_status tf_project_check_options(const tf_project_options *opts, tf_error *err);

/* Seeds rng with the stream of the projection of a population's posterior (one model's or the
 * model average): derived from seed and the population's label ("" = unnamed) only, so that a
 * population gets the same futures alone or among others, and `forecast --model M` and
 * `analyze` / `forecast --average` over the one candidate M draw the very same futures. Every
 * caller that projects a posterior takes its stream from here. */
void tf_project_stream(tf_rng *rng, uint64_t seed, const char *population);

void tf_projection_free(tf_projection *p); /* accepts NULL */

/* Binomial Monte Carlo standard error of a proportion p estimated from n independent runs:
 * sqrt(p (1 - p) / n). Runs that share a parameter draw are treated as independent, which is
 * exact for fixed parameters and slightly optimistic for posterior draws reused many times. */
double tf_project_se(double p, size_t n);

size_t tf_projection_horizon(const tf_projection *p);
size_t tf_projection_n_runs(const tf_projection *p);
size_t tf_projection_n_inputs(const tf_projection *p);
/* Runs given to input i. */
size_t tf_projection_input_runs(const tf_projection *p, size_t i);

/* Abundance bands: quantiles of N = exp(x) over the runs in year t = 0..horizon (t = 0 is the last
 * survey year), by linear interpolation between order statistics (Hyndman & Fan 1996, definition 7). */
typedef enum { TF_BAND_P025, TF_BAND_P25, TF_BAND_MEDIAN, TF_BAND_P75, TF_BAND_P975, TF_BAND_COUNT } tf_band;
double tf_project_band_level(tf_band b);      /* 0.05, 0.25, 0.5, 0.75, 0.95; NAN when out of range */
double tf_projection_band(const tf_projection *p, size_t t, tf_band b);

/* Quasi-extinction: for threshold k, the proportion of runs whose abundance has been at or below
 * the threshold in at least one whole year 0..t (a run stays counted once it has crossed), and its
 * standard error (tf_project_se). Non-decreasing in t. */
size_t tf_projection_n_thresholds(const tf_projection *p);
tf_threshold tf_projection_threshold(const tf_projection *p, size_t k);
double tf_projection_risk(const tf_projection *p, size_t k, size_t t);
double tf_projection_risk_se(const tf_projection *p, size_t k, size_t t);
/* The first year t <= horizon with risk >= 0.5 (the median of the first year at or below the
 * threshold), or NAN when the risk stays below 0.5 within the horizon ("not reached"). */
double tf_projection_median_time(const tf_projection *p, size_t k);

/* Declines: window w is TF_PROJECT_BASE_WINDOW (w = 0) and then the extra window if one was given.
 * The probability that N(window) <= (1 - d) N(0) for decline d, and its standard error. */
size_t tf_projection_n_windows(const tf_projection *p);
size_t tf_projection_window(const tf_projection *p, size_t w);
size_t tf_projection_n_declines(const tf_projection *p);
double tf_projection_decline(const tf_projection *p, size_t d);
double tf_projection_decline_prob(const tf_projection *p, size_t w, size_t d);
double tf_projection_decline_se(const tf_projection *p, size_t w, size_t d);

/* Paired differences between two projections a and b run with keep_runs from the same inputs,
 * options other than the actions, and the same stream state (common random numbers): the
 * difference of the risks of threshold k by year t (a minus b), or of decline d over window w,
 * and its Monte Carlo standard error from the per-run differences of the indicators,
 * sqrt(var(d_i) / runs) (the paired-sample standard error of a mean; common practice, no
 * source). With common random numbers the two indicators agree in most runs, so this is far
 * smaller than either projection's own error. TF_ERR_INVALID when a or b kept no runs or their
 * runs, thresholds or windows differ; *diff and *mcse are NAN then. */
tf_status tf_projection_risk_difference(const tf_projection *a, const tf_projection *b, size_t k, size_t t,
                                        double *diff, double *mcse, tf_error *err);
tf_status tf_projection_decline_difference(const tf_projection *a, const tf_projection *b, size_t w, size_t d,
                                           double *diff, double *mcse, tf_error *err);

/* With keep_runs: the first year 0..horizon in which run i was at or below threshold k, or
 * TF_PROJECTION_NEVER when it never was; TF_PROJECTION_NEVER also without kept runs. */
#define TF_PROJECTION_NEVER ((size_t)-1)
size_t tf_projection_run_first_hit(const tf_projection *p, size_t k, size_t i);

#endif
