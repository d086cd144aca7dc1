/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * bench-roll - rolling 21-day growth fits per second on one core.
 *
 *   bench-roll [--seconds S | --series N] [--window W]
 *
 * For the Poisson and the negative binomial model, each with the default
 * interval and with the Wald interval (default fit options otherwise:
 * weekday effects on, trailing windows), calls
 * twofold_growth_roll on the cases of the benchmark districts (benchgen.c,
 * 730 days each), one district after the other on one thread, until about
 * S CPU seconds (default 2) per variant have been spent or all 10,000 districts are
 * done; with --series N, the first N districts whatever the time (the
 * same work in every run, to compare two builds).  A series of n days holds n - W + 1 whole windows; windows per
 * second is their number over the time spent in twofold_growth_roll, per
 * CPU second of this thread (CLOCK_THREAD_CPUTIME_ID) and per wall second
 * (CLOCK_MONOTONIC).  Making the series is not timed.  Prints figures,
 * never judges them.
 */
#include "benchgen.h"
#include "benchutil.h"
#include "twofold.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int run_model(int model, int interval, const char *key,
                     double seconds, size_t nseries, size_t w) {
  const size_t n = BENCHGEN_DAYS;
  twofold_fit_options *o = NULL;
  double *y = malloc(n * sizeof *y), *rate = malloc(n * sizeof *rate);
  double *lo = malloc(n * sizeof *lo), *hi = malloc(n * sizeof *hi);
  int *status = malloc(n * sizeof *status);
  int rc = 1;
  if (y == NULL || rate == NULL || lo == NULL || hi == NULL ||
      status == NULL || twofold_fit_options_new(&o) != 0 ||
      twofold_fit_options_set_model(o, model) != 0 ||
      twofold_fit_options_set_interval(o, interval) != 0) {
    fputs("bench-roll: out of memory or bad options\n", stderr);
    goto done;
  }
  double cpu = 0, wall = 0, windows = 0, failed = 0;
  size_t series = 0;
  for (size_t i = 0;
       i < BENCHGEN_REGIONS && (nseries ? i < nseries : cpu < seconds); i++) {
    if (benchgen_region(i, n, y, NULL) != 0) {
      fputs("bench-roll: out of memory\n", stderr);
      goto done;
    }
    double c0 = bench_clock(CLOCK_THREAD_CPUTIME_ID);
    double w0 = bench_clock(CLOCK_MONOTONIC);
    int st = twofold_growth_roll(o, y, NULL, n, BENCHGEN_FIRST_WEEKDAY, w,
                                 TWOFOLD_ALIGN_TRAILING, rate, lo, hi,
                                 status);
    wall += bench_clock(CLOCK_MONOTONIC) - w0;
    cpu += bench_clock(CLOCK_THREAD_CPUTIME_ID) - c0;
    if (st != 0) {
      fprintf(stderr, "bench-roll: twofold_growth_roll: %s\n",
              twofold_strerror(st));
      goto done;
    }
    series++;
    for (size_t t = w - 1; t < n; t++) {
      windows++;
      if (status[t] != 0)
        failed++;
    }
  }
  printf("roll %-12s w=%zu: %zu series, %.0f windows (%.1f%% without an "
         "estimate); CPU %.3f s, wall %.3f s; %.3g windows/s per core "
         "(CPU), %.3g windows/s (wall)\n",
         key, w, series, windows, 100.0 * failed / windows, cpu, wall,
         windows / cpu, windows / wall);
  char name[64];
  snprintf(name, sizeof name, "%s.windows", key);
  bench_result(name, windows);
  snprintf(name, sizeof name, "%s.failed_share", key);
  bench_result(name, failed / windows);
  snprintf(name, sizeof name, "%s.cpu_s", key);
  bench_result(name, cpu);
  snprintf(name, sizeof name, "%s.wall_s", key);
  bench_result(name, wall);
  snprintf(name, sizeof name, "%s.windows_per_cpu_s", key);
  bench_result(name, windows / cpu);
  snprintf(name, sizeof name, "%s.windows_per_s", key);
  bench_result(name, windows / wall);
  fflush(stdout);
  rc = 0;
done:
  twofold_fit_options_free(o);
  free(y);
  free(rate);
  free(lo);
  free(hi);
  free(status);
  return rc;
}

int main(int argc, char **argv) {
  double seconds = 2.0;
  size_t w = 21, nseries = 0;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--seconds") == 0 && i + 1 < argc) {
      seconds = atof(argv[++i]);
      if (!(seconds > 0 && seconds <= 600)) {
        fputs("bench-roll: --seconds wants (0, 600]\n", stderr);
        return 2;
      }
    } else if (strcmp(argv[i], "--series") == 0 && i + 1 < argc) {
      if (bench_series_arg("bench-roll", argv[++i], BENCHGEN_REGIONS, &nseries))
        return 2;
    } else if (strcmp(argv[i], "--window") == 0 && i + 1 < argc) {
      long v = atol(argv[++i]);
      if (v < 2 || v > 365) {
        fputs("bench-roll: --window wants 2..365\n", stderr);
        return 2;
      }
      w = (size_t)v;
    } else {
      fputs("usage: bench-roll [--seconds S | --series N] [--window W]\n",
            stderr);
      return 2;
    }
  }
  int rc = run_model(TWOFOLD_MODEL_POISSON, TWOFOLD_INTERVAL_DEFAULT,
                     "poisson", seconds, nseries, w);
  rc |= run_model(TWOFOLD_MODEL_POISSON, TWOFOLD_INTERVAL_WALD,
                  "poisson-wald", seconds, nseries, w);
  rc |= run_model(TWOFOLD_MODEL_NEGBIN, TWOFOLD_INTERVAL_DEFAULT, "negbin",
                  seconds, nseries, w);
  rc |= run_model(TWOFOLD_MODEL_NEGBIN, TWOFOLD_INTERVAL_WALD, "negbin-wald",
                  seconds, nseries, w);
  return rc;
}
