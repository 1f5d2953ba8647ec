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

void tf_wording_threshold(const tf_threshold *t, char *buf, size_t size)
{
    char v[32];
    if (t->relative)
        snprintf(buf, size, "%s %% of the current abundance", tf_wording_percent(100 * t->value, v, sizeof v));
    else
        snprintf(buf, size, "%.15g animals", t->value);
}

void tf_wording_risk(const tf_threshold *t, size_t years, double p, char *buf, size_t size)
{
    char th[96], ch[32];
    tf_wording_threshold(t, th, sizeof th);
    snprintf(buf, size, "Averaging the models by their support, the chance of falling below %s at any time within %zu years is %s.", th,
             years, tf_wording_chance(p, ch, sizeof ch));
}
