/* What the main job costs as a user sees it: wall-clock time, CPU time and peak resident memory
 * of `tallyfit analyze` with its default settings on each demo survey (the CSV files in surveys/)
 * and on a simulated 30-year series with counts in the thousands under Poisson error, the binary
 * run as a child process and its peak RSS taken from wait4's resource usage (ru_maxrss,
 * kilobytes on Linux), the output written to a temporary directory that is removed afterwards.
 * The targets (the heron colony in 5 s, the large-count series in 10 s, under 150 MB, every fit
 * passing its checks) are stated for a machine whose floor particle-step costs 12.5 ns; the floor
 * (the loop of bench_filter.c, one bootstrap step of Gompertz + Poisson written by hand) is timed
 * in the same run, and each target is scaled by floor / 12.5 ns to this machine.
 * Then how peak memory scales with the run length of `tallyfit fit`: flat in the warm-up (its
 * draws are not kept; the pilot summary holds at most 1250 draws per chain, sampler/pmmh.c),
 * linear in the kept draws, whose storage is
 *   chains x kept x (parameters + log-likelihood + latent years) x 8 bytes
 * (sampler/fit.c keeps each draw's parameters, log-likelihood and latent path). The particle
 * count is fixed there so that tuning cannot differ between the runs.
 * Runs from the repository root (make bench); TALLYFIT names another binary. */
#define _GNU_SOURCE
#include <fcntl.h>
#include <ftw.h>
#include <glob.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/time.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "survey/survey.h"
#include "util/rng.h"

#include "floor.h"

/* Targets on a machine whose floor step costs FLOOR_REF_NS, 2 cores. */
#define TARGET_SURVEY "surveys/heron-colony.csv"
#define TARGET_SECONDS 5.0
#define TARGET_LARGE_SECONDS 10.0
#define TARGET_PEAK_MB 150.0
#define FLOOR_REF_NS 12.5
/* The large-count series: Gompertz near K = 4000, Poisson counts (as bench_filter.c). */
#define LARGE_NAME "large-counts.csv"
#define LARGE_YEARS 30

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static volatile double floor_sink;

/* Nanoseconds per particle-step of the floor (floor.h, the loop bench_filter times): best of
 * FLOOR_REPS timings of about 0.1 s at FLOOR_N particles. */
#define FLOOR_N 1000
#define FLOOR_REPS 5

static double floor_ns(void)
{
    double y[LARGE_YEARS], best = INFINITY, sink = 0;
    for (size_t t = 0; t < LARGE_YEARS; t++)
        y[t] = 3000.0 + 30.0 * (double)t;
    floor_ws ws;
    int ws_ok = floor_ws_alloc(&ws, FLOOR_N);
    const double a = 0.4, c = 1 - 0.4 / log(4000.0), sigma = 0.08;
    tf_rng rng;
    tf_rng_derive(&rng, 7, NULL, 0);
    size_t calls = 3000;
    for (int rep = 0; ws_ok && rep < FLOOR_REPS; rep++) {
        double t0 = now();
        for (size_t k = 0; k < calls; k++)
            sink += floor_loglik(&ws, y, LARGE_YEARS, a, c, sigma, log(y[0]), 0.5, rng.s);
        double ns = 1e9 * (now() - t0) / ((double)calls * FLOOR_N * LARGE_YEARS);
        best = ns < best ? ns : best;
    }
    floor_ws_free(&ws);
    floor_sink = sink;   /* so that the timed work cannot be optimised away */
    return best;
}

typedef struct {
    double wall, cpu;   /* seconds */
    long max_rss_kb;
} usage;

/* Runs argv (argv[0] the binary) with stdout sent to /dev/null and stderr to the file errors
 * (shown when the run fails); 1 when it exited with 0. */
static int run_child(char *const argv[], const char *errors, usage *u)
{
    double t0 = now();
    pid_t pid = fork();
    if (pid < 0) {
        perror("bench_analyze: fork");
        return 0;
    }
    if (pid == 0) {
        int null = open("/dev/null", O_WRONLY);
        int log = open(errors, O_WRONLY | O_CREAT | O_TRUNC, 0644);
        if (null >= 0)
            dup2(null, STDOUT_FILENO);
        if (log >= 0)
            dup2(log, STDERR_FILENO);
        execv(argv[0], argv);
        perror("bench_analyze: exec");
        _exit(127);
    }
    int status = 0;
    struct rusage ru;
    if (wait4(pid, &status, 0, &ru) != pid) {
        perror("bench_analyze: wait4");
        return 0;
    }
    u->wall = now() - t0;
    u->cpu = (double)ru.ru_utime.tv_sec + 1e-6 * (double)ru.ru_utime.tv_usec + (double)ru.ru_stime.tv_sec +
             1e-6 * (double)ru.ru_stime.tv_usec;
    u->max_rss_kb = ru.ru_maxrss;
    if (!WIFEXITED(status) || WEXITSTATUS(status) != 0) {
        fprintf(stderr, "bench_analyze: %s %s %s failed (status %d):\n", argv[0], argv[1], argv[2], status);
        FILE *f = fopen(errors, "r");
        char line[1024];
        while (f && fgets(line, sizeof line, f))
            fputs(line, stderr);
        if (f)
            fclose(f);
        return 0;
    }
    return 1;
}

static int remove_entry(const char *path, const struct stat *sb, int flag, struct FTW *ftw)
{
    (void)sb;
    (void)flag;
    (void)ftw;
    return remove(path);
}

static void remove_tree(const char *dir)
{
    if (nftw(dir, remove_entry, 16, FTW_DEPTH | FTW_PHYS) != 0)
        fprintf(stderr, "bench_analyze: could not remove %s\n", dir);
}

/* Fits flagged by the sampler diagnostics in the analysis' diagnostics tables (one per
 * population, their last column the status, "ok" when R-hat, ESS and the Pareto k passed).
 * Returns the number of fits seen, *flagged those not "ok"; 0 when no table was found. */
static size_t count_flagged(const char *dir, size_t *flagged)
{
    char pattern[4200];
    snprintf(pattern, sizeof pattern, "%s/*/*diagnostics.csv", dir);
    glob_t g;
    size_t n = 0;
    *flagged = 0;
    if (glob(pattern, 0, NULL, &g) != 0)
        return 0;
    for (size_t i = 0; i < g.gl_pathc; i++) {
        FILE *f = fopen(g.gl_pathv[i], "r");
        char line[4096];
        for (int row = 0; f && fgets(line, sizeof line, f); row++) {
            line[strcspn(line, "\r\n")] = '\0';
            if (row == 0 || !line[0])
                continue;
            /* The status is the last field; a quoted one may hold commas. */
            size_t len = strlen(line);
            const char *st;
            if (len > 1 && line[len - 1] == '"') {
                line[len - 1] = '\0';
                st = strrchr(line, '"');
                st = st ? st + 1 : line;
            } else {
                st = strrchr(line, ',');
                st = st ? st + 1 : line;
            }
            n++;
            if (strcmp(st, "ok") != 0)
                (*flagged)++;
        }
        if (f)
            fclose(f);
    }
    globfree(&g);
    return n;
}

/* A fresh temporary directory tmp, and inside it the output directory out (made by tallyfit)
 * and the file errors for the child's stderr. */
static int make_tmpdir(char *tmp, char *out, char *errors, size_t size)
{
    const char *base = getenv("TMPDIR");
    snprintf(tmp, size, "%s/tallyfit-bench-XXXXXX", base && *base ? base : "/tmp");
    if (!mkdtemp(tmp)) {
        perror("bench_analyze: mkdtemp");
        return 0;
    }
    if (snprintf(out, size, "%s/out", tmp) >= (int)size || snprintf(errors, size, "%s/stderr.txt", tmp) >= (int)size) {
        fprintf(stderr, "bench_analyze: temporary path too long\n");
        remove_tree(tmp);
        return 0;
    }
    return 1;
}

/* One target line: measured against the target scaled to this machine by the floor. */
static int report_target(const char *what, const usage *u, double target_s, double scale, size_t flagged)
{
    double scaled = target_s * scale, mb = (double)u->max_rss_kb / 1024.0;
    int met = u->wall <= scaled && mb < TARGET_PEAK_MB && flagged == 0;
    printf("bench_analyze: %s: %.1f s wall (CPU %.1f s, so at least %.1f s on 2 idle cores) against %.0f s at a "
           "%.1f ns floor step = %.1f s here: measured / target %.2f; peak %.1f MB (target < %.0f); %zu fit(s) "
           "flagged: %s\n",
           what, u->wall, u->cpu, u->cpu / 2, target_s, FLOOR_REF_NS, scaled, u->wall / scaled, mb, TARGET_PEAK_MB,
           flagged, met ? "met" : "NOT met");
    return met;
}

static int bench_analyze(char *bin)
{
    glob_t g;
    if (glob("surveys/*.csv", 0, NULL, &g) != 0 || g.gl_pathc == 0) {
        fprintf(stderr, "bench_analyze: no demo surveys in surveys/ (run from the repository root)\n");
        return 0;
    }
    /* The large-count series, simulated by the program itself into a temporary folder. */
    char stmp[4096], sdir[4096], serr[4096], large[4200];
    if (!make_tmpdir(stmp, sdir, serr, sizeof stmp)) {
        globfree(&g);
        return 0;
    }
    snprintf(large, sizeof large, "%s/%s", stmp, LARGE_NAME);
    char years[16];
    snprintf(years, sizeof years, "%d", LARGE_YEARS);
    char *sim[] = {bin, "simulate", "--model", "gompertz", "--parameter", "r=0.4,K=4000,sigma=0.08", "--years", years,
                   "--start", "3000", "--seed", "5", "-o", large, NULL};
    usage su;
    if (!run_child(sim, serr, &su)) {
        remove_tree(stmp);
        globfree(&g);
        return 0;
    }
    double floor = floor_ns(), scale = floor / FLOOR_REF_NS;
    printf("bench_analyze: floor particle-step %.2f ns here (targets are for %.1f ns: x %.2f)\n", floor,
           FLOOR_REF_NS, scale);
    printf("bench_analyze: tallyfit analyze SURVEY -o TMP --quiet, default settings, one run each\n");
    printf("%-28s %5s %5s %8s %8s %8s %12s\n", "survey", "pops", "years", "wall_s", "cpu_s", "peak_MB",
           "diagnostics");
    int ok = 1;
    usage heron = {NAN, NAN, 0}, big = {NAN, NAN, 0};
    size_t heron_flagged = 0, big_flagged = 0;
    double max_mb = 0;
    for (size_t i = 0; ok && i <= g.gl_pathc; i++) {
        const char *path = i < g.gl_pathc ? g.gl_pathv[i] : large;
        tf_error err;
        tf_error_init(&err);
        tf_survey *sv = NULL;
        if (tf_survey_read(path, &sv, &err) != TF_OK) {
            tf_error_print(&err, "bench_analyze", stderr);
            ok = 0;
            break;
        }
        size_t n_pops = tf_survey_n_series(sv), max_years = 0;
        for (size_t p = 0; p < n_pops; p++) {
            size_t ny = tf_series_n_years(tf_survey_series(sv, p));
            max_years = ny > max_years ? ny : max_years;
        }
        tf_survey_free(sv);

        char tmp[4096], dir[4096], errors[4096];
        if (!make_tmpdir(tmp, dir, errors, sizeof tmp)) {
            ok = 0;
            break;
        }
        char *argv[] = {bin, "analyze", (char *)path, "-o", dir, "--quiet", NULL};
        usage u;
        ok = run_child(argv, errors, &u);
        size_t flagged = 0, n_fits = ok ? count_flagged(dir, &flagged) : 0;
        remove_tree(tmp);
        if (!ok)
            break;
        char diag[64];
        if (n_fits == 0)
            snprintf(diag, sizeof diag, "none found");
        else if (flagged == 0)
            snprintf(diag, sizeof diag, "%zu fits ok", n_fits);
        else
            snprintf(diag, sizeof diag, "%zu/%zu flagged", flagged, n_fits);
        printf("%-28s %5zu %5zu %8.1f %8.1f %8.1f %12s\n", strrchr(path, '/') + 1, n_pops, max_years, u.wall,
               u.cpu, (double)u.max_rss_kb / 1024.0, diag);
        fflush(stdout);
        max_mb = fmax(max_mb, (double)u.max_rss_kb / 1024.0);
        if (strcmp(path, TARGET_SURVEY) == 0) {
            heron = u;
            heron_flagged = n_fits ? flagged : 1;
        } else if (path == large) {
            big = u;
            big_flagged = n_fits ? flagged : 1;
        }
    }
    globfree(&g);
    remove_tree(stmp);
    /* On a machine shared with other work the wall time grows with the load; the CPU time does
     * not, and over 2 cores it bounds the wall time an idle machine could reach. */
    if (ok && isfinite(heron.wall))
        report_target("heron-colony.csv (30 years, 1 population)", &heron, TARGET_SECONDS, scale, heron_flagged);
    if (ok && isfinite(big.wall))
        report_target(LARGE_NAME " (30 years, counts in the thousands, Poisson)", &big, TARGET_LARGE_SECONDS, scale,
                      big_flagged);
    if (ok)
        printf("bench_analyze: largest peak memory %.1f MB (target < %.0f MB): %s\n", max_mb, TARGET_PEAK_MB,
               max_mb < TARGET_PEAK_MB ? "met" : "NOT met");
    return ok;
}

/* One `tallyfit fit` of the heron survey: Gompertz + Poisson (3 parameters), 4 chains, 100
 * particles, 2 threads; thin 1, so kept draws per chain = iterations. */
static int fit_rss(char *bin, size_t warmup, size_t kept, long *kb)
{
    char tmp[4096], dir[4096], errors[4096], w[32], it[32];
    if (!make_tmpdir(tmp, dir, errors, sizeof tmp))
        return 0;
    snprintf(w, sizeof w, "%zu", warmup);
    snprintf(it, sizeof it, "%zu", kept);
    /* --kept-draws as large as the run, so that every iteration is kept (the default store of
     * 4000 would halve them and bound the memory, which is its job but not what is measured). */
    char *argv[] = {bin, "fit", TARGET_SURVEY, "--model", "gompertz", "--obs", "poisson",
                    "--particles", "100", "--threads", "2", "--thin", "1", "--warmup", w,
                    "--iterations", it, "--kept-draws", it, "-o", dir, "--quiet", NULL};
    usage u = {0};
    int ok = run_child(argv, errors, &u);
    remove_tree(tmp);
    *kb = u.max_rss_kb;
    if (ok)
        printf("  warm-up %5zu, kept %5zu per chain: peak %7.2f MB (%.1f s)\n", warmup, kept,
               (double)u.max_rss_kb / 1024.0, u.wall);
    return ok;
}

static int bench_memory(char *bin)
{
    tf_error err;
    tf_error_init(&err);
    tf_survey *sv = NULL;
    if (tf_survey_read(TARGET_SURVEY, &sv, &err) != TF_OK) {
        tf_error_print(&err, "bench_analyze", stderr);
        return 0;
    }
    size_t n_years = tf_series_n_years(tf_survey_series(sv, 0));
    tf_survey_free(sv);
    const size_t n_chains = 4, n_params = 3;
    printf("bench_analyze: peak memory of tallyfit fit %s --model gompertz --obs poisson, "
           "4 chains, 100 particles, thin 1\n", TARGET_SURVEY);
    /* Warm-up 1000, 8000, 32000 at 1000 kept; kept 1000, 4000, 8000 at warm-up 1000. */
    long w1, w8, w32, k4, k8;
    if (!fit_rss(bin, 1000, 1000, &w1) || !fit_rss(bin, 8000, 1000, &w8) || !fit_rss(bin, 32000, 1000, &w32) ||
        !fit_rss(bin, 1000, 4000, &k4) || !fit_rss(bin, 1000, 8000, &k8))
        return 0;
    const double mb = 1.0 / 1024.0;
    size_t per_draw = n_params + 1 + n_years;
    /* Flat: each longer warm-up within the pilot summary's bound (at most 1250 of its draws per
     * chain, d + 1 values each) plus 256 kB for page and allocator noise between runs; warm-up
     * draws stored like the kept ones would add 4 x 31000 x 34 x 8 bytes = 34 MB at 32000. */
    double bound_kb = (double)(n_chains * 1250 * (n_params + 1) * 8) / 1024.0 + 256.0;
    int flat = fabs((double)(w8 - w1)) <= bound_kb && fabs((double)(w32 - w1)) <= bound_kb;
    printf("  warm-up 1000 -> 8000 -> 32000: %+.2f MB, %+.2f MB (bound %.2f MB): %s\n", (double)(w8 - w1) * mb,
           (double)(w32 - w1) * mb, bound_kb * mb, flat ? "flat" : "NOT flat");
    /* Linear: the growth per kept draw from 1000 to 4000 and from 4000 to 8000 agree within 25 %
     * (allocator and page noise of some 100 kB on growths of 3-4 MB), and it is at least the
     * 8 bytes per value the draws take themselves. */
    double slope_a = (double)(k4 - w1) * 1024.0 / (double)(n_chains * 3000 * per_draw);
    double slope_b = (double)(k8 - k4) * 1024.0 / (double)(n_chains * 4000 * per_draw);
    int linear = slope_a > 0 && slope_b / slope_a > 0.75 && slope_b / slope_a < 1.0 / 0.75 && slope_a >= 7.5;
    printf("  kept 1000 -> 4000 -> 8000: %+.2f MB, %+.2f MB; %.1f and %.1f bytes per kept value "
           "(%zu chains x kept x %zu values: %zu parameters + log-lik + %zu years; 8 bytes stored): %s\n",
           (double)(k4 - w1) * mb, (double)(k8 - w1) * mb, slope_a, slope_b, n_chains, per_draw, n_params, n_years,
           linear ? "linear" : "NOT linear");
    printf("bench_analyze: peak memory is %s in the warm-up and %s in the kept draws\n", flat ? "flat" : "NOT flat",
           linear ? "linear" : "NOT linear");
    if (!flat || !linear)
        printf("bench_analyze: memory scaling check FAILED\n");
    return 1;
}

int main(void)
{
    const char *env = getenv("TALLYFIT");
    char bin[4096];
    snprintf(bin, sizeof bin, "%s", env && *env ? env : "./tallyfit");
    if (access(bin, X_OK) != 0) {
        fprintf(stderr, "bench_analyze: %s is not an executable (run from the repository root)\n", bin);
        return 1;
    }
    setenv("TALLYFIT_MODELS", "models", 0);
    if (!bench_memory(bin) || !bench_analyze(bin))
        return 1;
    return 0;
}
