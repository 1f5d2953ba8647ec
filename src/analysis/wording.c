/* The sentences of a summary; see wording.h. */
#include "analysis/wording.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

char *tf_wording_percent(double v, char *buf, size_t size)
{
    if (!isfinite(v)) {
        snprintf(buf, size, "n/a");
        return buf;
    }
    snprintf(buf, size, fabs(v) < 9.95 ? "%.1f" : "%.0f", v);
    size_t n = strlen(buf);
    if (n > 2 && !strcmp(buf + n - 2, ".0"))
        buf[n - 2] = '\0';
    if (!strcmp(buf, "-0"))
        strcpy(buf, "0");
    return buf;
}

char *tf_wording_chance(double p, char *buf, size_t size)
{
    if (!isfinite(p))
        snprintf(buf, size, "not available");
    else if (p < 0.005)
        snprintf(buf, size, "less than 1 %%");
    else if (p > 0.995)
        snprintf(buf, size, "more than 99 %%");
    else
        snprintf(buf, size, "about %.0f %%", 100 * p);
    return buf;
}

void tf_wording_trend(const tf_analysis_trend *t, char *buf, size_t size)
{
    char m[32], lo[32], hi[32];
    int first_year = t->first_year, last_year = t->last_year;
    tf_wording_percent(100 * t->median, m, sizeof m);
    tf_wording_percent(100 * t->q025, lo, sizeof lo);
    tf_wording_percent(100 * t->q975, hi, sizeof hi);
    if (!isfinite(t->median))
        snprintf(buf, size, "The trend over %d-%d could not be estimated.", first_year, last_year);
    else if (t->q975 < 0)
        snprintf(buf, size, "The counts point to a decline of about %s %% a year (95 %% interval %s %% to %s %%) over %d-%d.",
                 tf_wording_percent(-100 * t->median, m, sizeof m), lo, hi, first_year, last_year);
    else if (t->q025 > 0)
        snprintf(buf, size,
                 "The counts point to an increase of about %s %% a year (95 %% interval %s %% to %s %%) over %d-%d.", m,
                 lo, hi, first_year, last_year);
    else
        snprintf(buf, size,
                 "The counts show no clear trend over %d-%d: about %s %% a year, with a 95 %% interval from %s %% to %s %% "
                 "that includes no change.",
                 first_year, last_year, m, lo, hi);
}

void tf_wording_recent(const tf_analysis_trend *whole, const tf_analysis_trend *recent, char *buf, size_t size)
{
    if (recent->first_year == whole->first_year || !isfinite(recent->median)) {
        buf[0] = '\0';
        return;
    }
    char m[32], lo[32], hi[32];
    int n = recent->last_year - recent->first_year + 1;
    tf_wording_percent(100 * recent->q025, lo, sizeof lo);
    tf_wording_percent(100 * recent->q975, hi, sizeof hi);
    if (recent->q975 < 0)
        snprintf(buf, size, "Over the last %d years (%d-%d) it is still declining, by about %s %% a year (95 %% "
                 "interval %s %% to %s %%).", n, recent->first_year, recent->last_year,
                 tf_wording_percent(-100 * recent->median, m, sizeof m), lo, hi);
    else if (recent->q025 > 0)
        snprintf(buf, size, "Over the last %d years (%d-%d) it is increasing, by about %s %% a year (95 %% interval "
                 "%s %% to %s %%).", n, recent->first_year, recent->last_year,
                 tf_wording_percent(100 * recent->median, m, sizeof m), lo, hi);
    else
        snprintf(buf, size, "Over the last %d years (%d-%d) there is no clear trend: about %s %% a year (95 %% "
                 "interval %s %% to %s %%).", n, recent->first_year, recent->last_year,
                 tf_wording_percent(100 * recent->median, m, sizeof m), lo, hi);
}

void tf_wording_threshold(const tf_threshold *t, const char *unit, char *buf, size_t size)
{
    char v[32];
    if (t->relative)
        snprintf(buf, size, "%s %% of the current abundance", tf_wording_percent(100 * t->value, v, sizeof v));
    else
        snprintf(buf, size, "%.15g %s", t->value, unit ? unit : "animals");
}

void tf_wording_risk(const tf_threshold *t, const char *unit, size_t years, double p, char *buf, size_t size)
{
    char th[256], ch[32];
    tf_wording_threshold(t, unit, th, sizeof th);
    snprintf(buf, size, "Averaging the models by their support, the chance of falling below %s at any time within %zu years is %s.", th,
             years, tf_wording_chance(p, ch, sizeof ch));
}

void tf_wording_prior_sensitivity(const tf_analysis_pop *p, const char *unit, char *buf, size_t size, char *caution,
                                  size_t caution_size)
{
    const tf_sensitivity *sens = tf_analysis_pop_sensitivity(p);
    if (size)
        buf[0] = '\0';
    if (caution && caution_size)
        caution[0] = '\0';
    if (!sens)
        return;
    double lo, hi;
    int changes;
    tf_sensitivity_range(sens, &lo, &hi, &changes);
    if (!isfinite(lo))
        return;
    size_t rows = tf_sensitivity_n_rows(sens), n_folders = 0;
    for (size_t r = 1; r < rows; r++)
        n_folders += !tf_sensitivity_is_scale(sens, r);
    /* The 20-year window where the projection reaches it, else the longest it reaches. */
    const tf_projection *pr = tf_analysis_pop_projection(p);
    size_t y = 0;
    while (y + 1 < TF_ANALYSIS_N_RISK_YEARS && tf_analysis_risk_years[y + 1] <= 20 &&
           tf_analysis_risk_years[y + 1] <= tf_projection_horizon(pr))
        y++;
    double rlo = INFINITY, rhi = -INFINITY;
    for (size_t r = 0; r < rows && tf_projection_n_thresholds(pr) > 0; r++) {
        const tf_analysis_sens_row *row = tf_analysis_pop_sens_row(p, r);
        if (row && isfinite(row->risk[0][y])) {
            rlo = fmin(rlo, row->risk[0][y]);
            rhi = fmax(rhi, row->risk[0][y]);
        }
    }
    char a[32], b[32], risk[512] = "";
    if (isfinite(rlo)) {
        char th[256], c[32], d[32];
        tf_threshold t0 = tf_projection_threshold(pr, 0);
        tf_wording_threshold(&t0, unit, th, sizeof th);
        snprintf(risk, sizeof risk, "; %zu-year risk (below %s) %s %% to %s %%", tf_analysis_risk_years[y], th,
                 tf_wording_percent(100 * rlo, c, sizeof c), tf_wording_percent(100 * rhi, d, sizeof d));
    }
    snprintf(buf, size, "With priors half or twice as wide%s: best model's probability %s %% to %s %%%s "
             "(prior-sensitivity sheet).",
             n_folders ? " and those of the folders given" : "", tf_wording_percent(100 * lo, a, sizeof a),
             tf_wording_percent(100 * hi, b, sizeof b), risk);
    if (!changes || !caution || !caution_size)
        return;
    size_t b0 = tf_sensitivity_best(sens, 0);
    for (size_t r = 1; r < rows; r++) {
        size_t br = tf_sensitivity_best(sens, r);
        if (br == b0 || br >= tf_sensitivity_n_models(sens))
            continue;
        snprintf(caution, caution_size,
                 "Under other priors (%s) another model is the best supported (%s): which model fits best rests "
                 "partly on the priors, not only on the counts. Read the model probabilities with care.",
                 tf_sensitivity_label(sens, r), tf_sensitivity_model_name(sens, br));
        return;
    }
}
