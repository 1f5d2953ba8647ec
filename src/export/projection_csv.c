/* CSV tables of a projection; only formats what the projection holds. */
#include "export/projection_csv.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "export/atomic_file.h"

enum { N_TABLES = 3 };

static void put_calendar(FILE *out, int year0, size_t t)
{
    if (year0 != TF_EXPORT_NO_YEAR)
        fprintf(out, "%ld", (long)year0 + (long)t);
}

static void write_bands(FILE *out, const tf_projection *p, int year0)
{
    static const tf_band order[] = {TF_BAND_MEDIAN, TF_BAND_P25, TF_BAND_P75, TF_BAND_P05, TF_BAND_P95};
    fputs("year,calendar_year,median,pct25,pct75,pct5,pct95\n", out);
    for (size_t t = 0; t <= tf_projection_horizon(p); t++) {
        fprintf(out, "%zu,", t);
        put_calendar(out, year0, t);
        for (size_t b = 0; b < sizeof order / sizeof *order; b++)
            fprintf(out, ",%.8g", tf_projection_band(p, t, order[b]));
        fputc('\n', out);
    }
}

static void write_risk(FILE *out, const tf_projection *p, int year0)
{
    fputs("year,calendar_year,threshold,probability,se\n", out);
    for (size_t k = 0; k < tf_projection_n_thresholds(p); k++) {
        tf_threshold th = tf_projection_threshold(p, k);
        char label[48];
        tf_project_threshold_label(&th, label, sizeof label);
        for (size_t t = 0; t <= tf_projection_horizon(p); t++) {
            fprintf(out, "%zu,", t);
            put_calendar(out, year0, t);
            fprintf(out, ",%s,%.8g,%.6g\n", label, tf_projection_risk(p, k, t), tf_projection_risk_se(p, k, t));
        }
    }
}

static void write_declines(FILE *out, const tf_projection *p)
{
    fputs("window,decline,probability,se\n", out);
    for (size_t w = 0; w < tf_projection_n_windows(p); w++)
        for (size_t d = 0; d < tf_projection_n_declines(p); d++)
            fprintf(out, "%zu,%.6g,%.8g,%.6g\n", tf_projection_window(p, w), tf_projection_decline(p, d),
                    tf_projection_decline_prob(p, w, d), tf_projection_decline_se(p, w, d));
}

tf_status tf_export_projection_csv(const tf_projection *p, const char *dir, int year0,
                                   const volatile sig_atomic_t *stop, tf_error *err)
{
    static const char *const names[N_TABLES] = {TF_EXPORT_BANDS_CSV, TF_EXPORT_RISK_CSV, TF_EXPORT_DECLINE_CSV};
    tf_atomic_file *files[N_TABLES] = {0};
    tf_status st = TF_OK;
    size_t n_dir = strlen(dir);
    int slash = n_dir > 0 && dir[n_dir - 1] != '/';
    for (int i = 0; i < N_TABLES && !st; i++) {
        char *path = malloc(n_dir + (size_t)slash + strlen(names[i]) + 1);
        if (!path) {
            st = tf_error_add(err, TF_ERR_NOMEM, NULL, 0, 0, NULL, "out of memory");
            break;
        }
        sprintf(path, "%s%s%s", dir, slash ? "/" : "", names[i]);
        st = tf_atomic_open(path, &files[i], err);
        free(path);
    }
    if (!st) {
        write_bands(tf_atomic_stream(files[0]), p, year0);
        write_risk(tf_atomic_stream(files[1]), p, year0);
        write_declines(tf_atomic_stream(files[2]), p);
    }
    if (!st && stop && *stop)
        st = tf_error_add(err, TF_ERR_INTERRUPTED, NULL, 0, 0, NULL, "interrupted; no tables written");
    if (st) {
        for (int i = 0; i < N_TABLES; i++)
            tf_atomic_abort(files[i]);
        return st;
    }
    return tf_atomic_commit_group(files, N_TABLES, err);
}
