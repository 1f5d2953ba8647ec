/* Weighted quantiles and moments of pooled draws; see average.h. */
#include "analysis/average.h"

#include <math.h>
#include <stdlib.h>

static int by_value(const void *a, const void *b)
{
    double x = ((const tf_average_point *)a)->value, y = ((const tf_average_point *)b)->value;
    return (x > y) - (x < y);
}

int tf_average_quantiles(tf_average_point *pts, size_t n, const double *probs, size_t n_probs, double *out)
{
    double total = 0;
    for (size_t i = 0; i < n; i++)
        total += pts[i].weight;
    for (size_t k = 0; k < n_probs; k++)
        out[k] = NAN;
    if (!(total > 0))
        return 0;
    qsort(pts, n, sizeof *pts, by_value);
    for (size_t k = 0; k < n_probs; k++) {
        double p = probs[k];
        /* Walk the midpoints: prev_pos/prev_val is the last point at or below p. */
        double before = 0, prev_pos = -1, prev_val = NAN;
        int found = 0;
        for (size_t i = 0; i < n && !found; i++) {
            double w = pts[i].weight;
            if (w <= 0)
                continue;
            double pos = (before + 0.5 * w) / total;
            before += w;
            if (pos >= p) {
                if (prev_pos < 0 || pos == prev_pos)
                    out[k] = pts[i].value;
                else
                    out[k] = prev_val + (pts[i].value - prev_val) * (p - prev_pos) / (pos - prev_pos);
                found = 1;
            }
            prev_pos = pos;
            prev_val = pts[i].value;
        }
        if (!found)
            out[k] = prev_val;
    }
    return 1;
}

void tf_average_moments(const tf_average_point *pts, size_t n, double *mean, double *share_negative)
{
    double total = 0, sum = 0, neg = 0;
    for (size_t i = 0; i < n; i++) {
        double w = pts[i].weight;
        if (w <= 0)
            continue;
        total += w;
        sum += w * pts[i].value;
        if (pts[i].value < 0)
            neg += w;
    }
    *mean = total > 0 ? sum / total : NAN;
    *share_negative = total > 0 ? neg / total : NAN;
}
