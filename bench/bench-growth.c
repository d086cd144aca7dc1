/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * bench-growth: rolling 21-day windows per second (one core), for the
 * Poisson fast path (Wald and default intervals) and NB2 (Wald and
 * default).  Built and run by `make bench`; it prints, never asserts.
 * Wall-clock rates depend on the machine's load; the CPU-time figures
 * less so.
 */
#define _POSIX_C_SOURCE 200809L /* clock_gettime */
#include "twofold.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static double clk(clockid_t id) {
  struct timespec ts;
  clock_gettime(id, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}
static double now(void) { return clk(CLOCK_MONOTONIC); }
/* CPU time of this process: on a shared machine the figure that does not
 * depend on what else is running */
static double cpu(void) { return clk(CLOCK_PROCESS_CPUTIME_ID); }

static const char *only; /* run only the cases whose label has this */

static void run(const char *label, int model, int kind, const double *y,
                size_t n, double *r, double *lo, double *hi, int *st) {
  if (only && strstr(label, only) == NULL)
    return;
  twofold_fit_options *o;
  if (twofold_fit_options_new(&o))
    exit(2);
  twofold_fit_options_set_model(o, model);
  twofold_fit_options_set_interval(o, kind);
  double t0 = now(), t1, c0 = cpu();
  long windows = 0;
  do {
    twofold_growth_roll(o, y, NULL, n, 1, 21, TWOFOLD_ALIGN_TRAILING, r, lo,
                        hi, st);
    windows += (long)(n - 20);
    t1 = now();
  } while (t1 - t0 < 1.0);
  double c1 = cpu();
  long bad = 0;
  for (size_t i = 20; i < n; i++)
    bad += st[i] != 0;
  printf("%-32s %11.0f windows/s wall %11.0f windows/s cpu "
         "%8.1f ns cpu/window (%ld windows, %ld failed per pass)\n",
         label, (double)windows / (t1 - t0), (double)windows / (c1 - c0),
         1e9 * (c1 - c0) / (double)windows, windows, bad);
  twofold_fit_options_free(o);
}

/* Usage: bench-growth [substring of the case labels to run] */
int main(int argc, char **argv) {
  only = argc > 1 ? argv[1] : NULL;
  size_t n = 20000;
  double *y = malloc(n * sizeof *y), *r = malloc(n * sizeof *r);
  double *lo = malloc(n * sizeof *lo), *hi = malloc(n * sizeof *hi);
  int *st = malloc(n * sizeof *st);
  if (!y || !r || !lo || !hi || !st)
    return 2;
  /* a deterministic wavy epidemic curve with a weekday pattern and
   * multiplicative noise from a fixed linear congruential sequence */
  unsigned long long s = 12345;
  for (size_t t = 0; t < n; t++) {
    s = s * 6364136223846793005ULL + 1442695040888963407ULL;
    double u = (double)(s >> 11) / 9007199254740992.0;
    double lvl = 200.0 * exp(1.5 * sin((double)t / 60.0));
    double wk = (t % 7 == 5 || t % 7 == 6) ? 0.7 : 1.08;
    y[t] = floor(lvl * wk * (0.75 + 0.5 * u));
  }
  run("poisson, wald", TWOFOLD_MODEL_POISSON, TWOFOLD_INTERVAL_WALD, y, n, r,
      lo, hi, st);
  run("poisson, default (profile)", TWOFOLD_MODEL_POISSON,
      TWOFOLD_INTERVAL_DEFAULT, y, n, r, lo, hi, st);
  run("quasipoisson, default (wald-t)", TWOFOLD_MODEL_QUASIPOISSON,
      TWOFOLD_INTERVAL_DEFAULT, y, 4000, r, lo, hi, st);
  run("negbin, wald", TWOFOLD_MODEL_NEGBIN, TWOFOLD_INTERVAL_WALD, y, 4000, r,
      lo, hi, st);
  run("negbin, default (small-sample)", TWOFOLD_MODEL_NEGBIN,
      TWOFOLD_INTERVAL_DEFAULT, y, 2000, r, lo, hi, st);
  free(y);
  free(r);
  free(lo);
  free(hi);
  free(st);
  return 0;
}
