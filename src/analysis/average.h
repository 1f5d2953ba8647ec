/* Model-averaged posterior summaries: the draws of several fitted models pooled into one mixture,
 * each draw weighted by its model's posterior probability divided by the model's number of
 * draws (Bayesian model averaging, Hoeting, Madigan, Raftery & Volinsky 1999, Statistical
 * Science 14:382, eq. 1), summarised by weighted quantiles. */
#ifndef TF_AVERAGE_H
#define TF_AVERAGE_H

#include <stddef.h>

/* One value with its weight. */
typedef struct {
    double value;
    double weight;
} tf_average_point;

/* Sorts pts[0..n) by value and writes the probs[k]-quantile (0 <= probs[k] <= 1) into out[k] for
 * k < n_probs. Each point of positive weight is placed at the midpoint of its share of the total
 * weight, (W_before + w / 2) / W, and the quantile interpolates linearly between neighbouring
 * points, holding the first and last values beyond their midpoints. With equal weights this is
 * definition 5 of Hyndman & Fan (1996, The American Statistician 50:361); spreading each point
 * over its share of the mass is common practice, no source. Points of weight 0 are ignored.
 * Values must not be NaN; weights must be finite and >= 0. Returns 0 (out all NaN) when no
 * weight is positive, else 1. */
int tf_average_quantiles(tf_average_point *pts, size_t n, const double *probs, size_t n_probs, double *out);

/* The weighted mean of the values and the weighted share of values below zero. Both NaN when no
 * weight is positive. */
void tf_average_moments(const tf_average_point *pts, size_t n, double *mean, double *share_negative);

#endif
