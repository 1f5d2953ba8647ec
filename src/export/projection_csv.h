/* The projection as CSV tables: abundance bands, quasi-extinction curves and decline probabilities. */
#ifndef TF_PROJECTION_CSV_H
#define TF_PROJECTION_CSV_H

#include <limits.h>
#include <signal.h>

#include "project/project.h"
#include "util/error.h"

/* File names inside the output folder. */
#define TF_EXPORT_BANDS_CSV "forecast_bands.csv"
#define TF_EXPORT_RISK_CSV "forecast_quasi_extinction.csv"
#define TF_EXPORT_DECLINE_CSV "forecast_declines.csv"
/* year0 value for "calendar year unknown" (the calendar_year column is then left empty). */
#define TF_EXPORT_NO_YEAR INT_MIN

/* Writes the three tables into the existing folder dir, all or none: each is written to a temporary
 * file first and the three are renamed into place only when all are complete.
 *   forecast_bands.csv             year,calendar_year,median,pct25,pct75,pct5,pct95
 *   forecast_quasi_extinction.csv  year,calendar_year,threshold,probability,se
 *   forecast_declines.csv          window,decline,probability,se
 * year counts years ahead (0 = last survey year, calendar year year0). If *stop becomes nonzero
 * before the renames (stop may be NULL), nothing is renamed and TF_ERR_INTERRUPTED is returned.
 * TF_ERR_IO names the file; temporary files never remain. */
tf_status tf_export_projection_csv(const tf_projection *p, const char *dir, int year0,
                                   const volatile sig_atomic_t *stop, tf_error *err);

#endif
