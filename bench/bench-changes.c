/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Benchmark of the changepoint module (prints, never fails on time):
 * offline posterior of a 730-day series per kind, online update cost per
 * region-day, pruning error against the unpruned recursion.  Invented
 * series from a fixed seed. */
#define _POSIX_C_SOURCE 200809L
#include "twofold.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

static double now(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static uint64_t st = 12345;
static double unif(void) {
  st = st * 6364136223846793005ULL + 1442695040888963407ULL;
  return ((double)(st >> 11) + 0.5) / 9007199254740992.0;
}
static double pois(double mu) { /* normal approximation is enough here */
  double z = sqrt(-2 * log(unif())) * cos(6.283185307179586 * unif());
  double v = floor(mu + sqrt(mu) * z + 0.5);
  return v < 0 ? 0 : v;
}

int main(void) {
  setvbuf(stdout, NULL, _IONBF, 0);
  enum { N = 730 };
  static double y[N];
  double eta = log(50), g = 0.02;
  for (int t = 0; t < N; t++) {
    if (t % 120 == 60)
      g = -g * 1.2;
    eta += g;
    if (eta > log(2000))
      g = -0.02;
    if (eta < log(5))
      g = 0.02;
    y[t] = pois(exp(eta) * (t % 7 == 6 ? 0.6 : 1.0));
  }
  twofold_cp_options *o;
  twofold_cp_options_new(&o);
  twofold_changes *ch;
  twofold_changes_new(&ch);
  for (int kind = 0; kind < 3; kind++) {
    twofold_cp_options_set_kind(o, kind);
    int reps = kind == 0 ? 1 : 5;
    double t0 = now();
    for (int r = 0; r < reps; r++)
      if (twofold_changes_run(ch, o, y, N, 1) != 0) {
        fprintf(stderr, "run failed: %s\n", twofold_changes_errmsg(ch));
        return 1;
      }
    double dt = (now() - t0) / reps;
    printf("offline %-5s 730 days: %8.2f ms  (E[K] %.1f, MAP changes %zu)\n",
           twofold_cp_kind_to_string(kind), 1e3 * dt,
           twofold_changes_count_mean(ch), twofold_changes_map_count(ch));
  }
  /* pruning error */
  for (int kind = 1; kind < 3; kind++) {
    static double p0[N], p1[N], g0[N], g1[N];
    twofold_cp_options_set_kind(o, kind);
    twofold_cp_options_set_prune(o, 0);
    double t0 = now();
    twofold_changes_run(ch, o, y, N, 1);
    double tu = now() - t0;
    twofold_changes_p_change(ch, p0);
    twofold_changes_growth(ch, g0, NULL, NULL);
    double z0 = twofold_changes_log_evidence(ch);
    double eps[] = {1e-10, 1e-6};
    for (int e = 0; e < 2; e++) {
      twofold_cp_options_set_prune(o, eps[e]);
      t0 = now();
      twofold_changes_run(ch, o, y, N, 1);
      double tp = now() - t0;
      twofold_changes_p_change(ch, p1);
      twofold_changes_growth(ch, g1, NULL, NULL);
      double dp = 0, dg = 0;
      for (int i = 0; i < N; i++) {
        dp = fmax(dp, fabs(p0[i] - p1[i]));
        dg = fmax(dg, fabs(g0[i] - g1[i]));
      }
      printf("pruning %-5s eps %.0e: max |dp| %.2e, max |dgrowth| %.2e, "
             "|dlogZ| %.2e; %.1f ms vs unpruned %.1f ms\n",
             twofold_cp_kind_to_string(kind), eps[e], dp, dg,
             fabs(twofold_changes_log_evidence(ch) - z0), 1e3 * tp,
             1e3 * tu);
    }
    twofold_cp_options_set_prune(o, 1e-10);
  }
  /* online */
  size_t caps[] = {20, 50, 100};
  for (int kind = 1; kind < 3; kind++)
    for (int c = 0; c < 3; c++) {
      twofold_cp_options_set_kind(o, kind);
      twofold_online *on;
      twofold_online_new(o, y, 28, 1, caps[c], 1, &on);
      int regions = 20;
      double t0 = now();
      for (int r = 0; r < regions; r++)
        for (int t = 28; t < N; t++)
          twofold_online_add(on, y[t]);
      double dt = (now() - t0) / (regions * (N - 28));
      double p;
      twofold_online_p_recent(on, 7, &p);
      printf("online %-5s %3zu candidates: %6.2f us per region-day\n",
             twofold_cp_kind_to_string(kind), caps[c], 1e6 * dt);
      twofold_online_free(on);
    }
  twofold_changes_free(ch);
  twofold_cp_options_free(o);
  return 0;
}
