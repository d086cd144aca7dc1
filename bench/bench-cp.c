/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * bench-cp - changepoint figures on the benchmark districts.
 *
 *   bench-cp [--seconds S | --series N] [--part PART] [--no-kink]
 *
 * Cases of the benchmark districts (benchgen.c, 730 days each), default
 * changepoint options unless said otherwise, one thread:
 *  - offline: twofold_changes_run per 730-day series, for the default kind
 *    (kink) and for jump and level segments, over successive districts
 *    until about S CPU seconds (default 2) per kind, or over the first N
 *    districts with --series N (the same work in every run, to compare two
 *    builds): mean and largest milliseconds per series (CPU time of this
 *    thread and wall time);
 *  - online: twofold_online_new (jump, then kink segments, the first 365 days as
 *    history, 100 candidates, seed 1) then twofold_online_add for each of
 *    the other 365 days, on up to 200 districts: microseconds per add;
 *  - pruning: on 3 districts, the default pruning threshold against the
 *    exact, unpruned recursion (threshold 0), for jump, level and kink
 *    segments: the largest absolute difference in P(change on day i), in
 *    the posterior mean growth rate, and in the log evidence (skipped,
 *    saying so, when a pruned run alone takes over a second).
 * --part runs one of the three (offline, online, prune; default all);
 * --no-kink leaves kink segments out of the pruning check.
 * Lines "result<TAB>key<TAB>value" carry the figures to bench/run.sh.
 * Prints figures, never judges them.
 */
#include "benchgen.h"
#include "benchutil.h"
#include "twofold.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define N BENCHGEN_DAYS
#define HISTORY 365
#define CANDIDATES 100

static double y[N];

static int offline(twofold_changes *ch, twofold_cp_options *o, int kind,
                   double seconds, size_t nseries) {
  const char *name = twofold_cp_kind_to_string(kind);
  if (twofold_cp_options_set_kind(o, kind) != 0)
    return 1;
  double cpu = 0, wall = 0, worst = 0;
  size_t runs = 0;
  for (size_t i = 0;
       i < BENCHGEN_REGIONS && (nseries ? i < nseries : cpu < seconds); i++) {
    if (benchgen_region(i, N, y, NULL) != 0)
      return 1;
    double c0 = bench_clock(CLOCK_THREAD_CPUTIME_ID);
    double w0 = bench_clock(CLOCK_MONOTONIC);
    int st = twofold_changes_run(ch, o, y, N, BENCHGEN_FIRST_WEEKDAY);
    double dw = bench_clock(CLOCK_MONOTONIC) - w0;
    double dc = bench_clock(CLOCK_THREAD_CPUTIME_ID) - c0;
    if (st != 0) {
      fprintf(stderr, "bench-cp: district %zu: %s\n", i + 1,
              twofold_changes_errmsg(ch));
      return 1;
    }
    cpu += dc;
    wall += dw;
    if (dc > worst)
      worst = dc;
    runs++;
  }
  printf("offline %-5s %d days: %zu series; per series CPU %.2f ms (largest "
         "%.2f ms), wall %.2f ms\n",
         name, N, runs, 1e3 * cpu / (double)runs, 1e3 * worst,
         1e3 * wall / (double)runs);
  char key[64];
  snprintf(key, sizeof key, "offline.%s.series", name);
  bench_result(key, (double)runs);
  snprintf(key, sizeof key, "offline.%s.cpu_ms", name);
  bench_result(key, 1e3 * cpu / (double)runs);
  snprintf(key, sizeof key, "offline.%s.max_cpu_ms", name);
  bench_result(key, 1e3 * worst);
  snprintf(key, sizeof key, "offline.%s.wall_ms", name);
  bench_result(key, 1e3 * wall / (double)runs);
  fflush(stdout);
  return 0;
}

static int online(twofold_cp_options *o, int kind) {
  if (twofold_cp_options_set_kind(o, kind) != 0)
    return 1;
  int jump = kind == TWOFOLD_CP_JUMP;
  double cpu = 0, wall = 0, adds = 0, cand = 0;
  size_t districts = 0;
  for (size_t i = 0; i < 200; i++) {
    if (benchgen_region(i, N, y, NULL) != 0)
      return 1;
    twofold_online *on = NULL;
    int st = twofold_online_new(o, y, HISTORY, BENCHGEN_FIRST_WEEKDAY,
                                CANDIDATES, 1, &on);
    if (st != 0) {
      fprintf(stderr, "bench-cp: online district %zu: %s\n", i + 1,
              twofold_strerror(st));
      return 1;
    }
    double c0 = bench_clock(CLOCK_THREAD_CPUTIME_ID);
    double w0 = bench_clock(CLOCK_MONOTONIC);
    for (size_t t = HISTORY; t < N && st == 0; t++)
      st = twofold_online_add(on, y[t]);
    wall += bench_clock(CLOCK_MONOTONIC) - w0;
    cpu += bench_clock(CLOCK_THREAD_CPUTIME_ID) - c0;
    if (st != 0) {
      fprintf(stderr, "bench-cp: online district %zu: %s\n", i + 1,
              twofold_online_errmsg(on));
      twofold_online_free(on);
      return 1;
    }
    cand += (double)twofold_online_candidates(on);
    adds += N - HISTORY;
    districts++;
    twofold_online_free(on);
  }
  printf("online %s, %d candidates: %zu districts x %d days; per "
         "region-day CPU %.2f us, wall %.2f us (%.0f candidates kept at the "
         "end on average)\n",
         twofold_cp_kind_to_string(kind), CANDIDATES, districts,
         N - HISTORY, 1e6 * cpu / adds, 1e6 * wall / adds,
         cand / (double)districts);
  bench_result(jump ? "online.cpu_us" : "online.kink.cpu_us",
               1e6 * cpu / adds);
  bench_result(jump ? "online.wall_us" : "online.kink.wall_us",
               1e6 * wall / adds);
  fflush(stdout);
  return 0;
}

static int pruning(twofold_changes *ch, twofold_cp_options *o, int kind) {
  const char *name = twofold_cp_kind_to_string(kind);
  static double p0[N], p1[N], g0[N], g1[N];
  double eps = twofold_cp_options_get_prune(o);
  double dp = 0, dg = 0, dz = 0, t_exact = 0, t_pruned = 0;
  if (twofold_cp_options_set_kind(o, kind) != 0)
    return 1;
  for (size_t i = 0; i < 3; i++) {
    if (benchgen_region(i, N, y, NULL) != 0)
      return 1;
    double c0 = bench_clock(CLOCK_THREAD_CPUTIME_ID);
    int st = twofold_changes_run(ch, o, y, N, BENCHGEN_FIRST_WEEKDAY);
    t_pruned += bench_clock(CLOCK_THREAD_CPUTIME_ID) - c0;
    if (st != 0 || twofold_changes_p_change(ch, p1) != 0 ||
        twofold_changes_growth(ch, g1, NULL, NULL) != 0)
      goto fail;
    double z1 = twofold_changes_log_evidence(ch);
    if (t_pruned > 1.0) {
      /* The exact recursion costs far more than the pruned one: skip. */
      printf("pruning %-5s SKIPPED: the pruned run alone took %.1f s CPU, "
             "the exact one would take much longer\n",
             name, t_pruned);
      fflush(stdout);
      return 0;
    }
    if (twofold_cp_options_set_prune(o, 0.0) != 0)
      return 1;
    c0 = bench_clock(CLOCK_THREAD_CPUTIME_ID);
    st = twofold_changes_run(ch, o, y, N, BENCHGEN_FIRST_WEEKDAY);
    t_exact += bench_clock(CLOCK_THREAD_CPUTIME_ID) - c0;
    twofold_cp_options_set_prune(o, eps);
    if (st != 0 || twofold_changes_p_change(ch, p0) != 0 ||
        twofold_changes_growth(ch, g0, NULL, NULL) != 0)
      goto fail;
    double z0 = twofold_changes_log_evidence(ch);
    for (size_t t = 0; t < N; t++) {
      if (fabs(p1[t] - p0[t]) > dp)
        dp = fabs(p1[t] - p0[t]);
      if (fabs(g1[t] - g0[t]) > dg)
        dg = fabs(g1[t] - g0[t]);
    }
    if (fabs(z1 - z0) > dz)
      dz = fabs(z1 - z0);
    continue;
  fail:
    fprintf(stderr, "bench-cp: pruning %s district %zu: %s\n", name, i + 1,
            twofold_changes_errmsg(ch));
    return 1;
  }
  printf("pruning %-5s threshold %g vs exact, 3 districts: max |dP(change)| "
         "%.3g, max |d growth| %.3g /day, max |d log evidence| %.3g; CPU "
         "%.1f ms pruned, %.1f ms exact per series\n",
         name, eps, dp, dg, dz, 1e3 * t_pruned / 3, 1e3 * t_exact / 3);
  char key[64];
  snprintf(key, sizeof key, "prune.%s.max_dp", name);
  bench_result(key, dp);
  snprintf(key, sizeof key, "prune.%s.max_dgrowth", name);
  bench_result(key, dg);
  snprintf(key, sizeof key, "prune.%s.max_dlogev", name);
  bench_result(key, dz);
  snprintf(key, sizeof key, "prune.%s.exact_cpu_ms", name);
  bench_result(key, 1e3 * t_exact / 3);
  fflush(stdout);
  return 0;
}

int main(int argc, char **argv) {
  double seconds = 2.0;
  size_t nseries = 0;
  const char *part = "all";
  int kink_prune = 1;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--seconds") == 0 && i + 1 < argc) {
      seconds = atof(argv[++i]);
      if (!(seconds > 0 && seconds <= 600)) {
        fputs("bench-cp: --seconds wants (0, 600]\n", stderr);
        return 2;
      }
    } else if (strcmp(argv[i], "--series") == 0 && i + 1 < argc) {
      if (bench_series_arg("bench-cp", argv[++i], BENCHGEN_REGIONS, &nseries))
        return 2;
    } else if (strcmp(argv[i], "--no-kink") == 0) {
      kink_prune = 0;
    } else if (strcmp(argv[i], "--part") == 0 && i + 1 < argc) {
      part = argv[++i];
      if (strcmp(part, "offline") != 0 && strcmp(part, "online") != 0 &&
          strcmp(part, "prune") != 0 && strcmp(part, "all") != 0) {
        fputs("bench-cp: --part wants offline, online, prune or all\n",
              stderr);
        return 2;
      }
    } else {
      fputs("usage: bench-cp [--seconds S | --series N] "
            "[--part offline|online|prune|all] [--no-kink]\n",
            stderr);
      return 2;
    }
  }
  int all = strcmp(part, "all") == 0;
  twofold_cp_options *o = NULL;
  twofold_changes *ch = NULL;
  int rc = 1;
  if (twofold_cp_options_new(&o) != 0 || twofold_changes_new(&ch) != 0) {
    fputs("bench-cp: out of memory\n", stderr);
    goto done;
  }
  int kinds[3] = {TWOFOLD_CP_KINK, TWOFOLD_CP_JUMP, TWOFOLD_CP_LEVEL};
  rc = 0;
  if (all || strcmp(part, "offline") == 0)
    for (int k = 0; k < 3; k++)
      rc |= offline(ch, o, kinds[k], seconds, nseries);
  if (all || strcmp(part, "online") == 0)
    rc = rc | online(o, TWOFOLD_CP_JUMP) | online(o, TWOFOLD_CP_KINK);
  if (all || strcmp(part, "prune") == 0)
    for (int k = 2; k >= (kink_prune ? 0 : 1); k--)
      rc |= pruning(ch, o, kinds[k]);
done:
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
  return rc;
}
