/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * bench-read - rows parsed per second by twofold_read_file.
 *
 *   bench-read [--repeat N] KEY=FILE ...
 *
 * Reads each FILE (plain or gzip CSV) N times (default 2) with the default
 * options and prints, for the fastest run, the wall time (CLOCK_MONOTONIC),
 * the CPU time of the whole process (getrusage: user + system, summed over
 * the reader's threads, so it may exceed the wall time when gzip is
 * decompressed in a second thread), the rows (region-days read) per wall
 * second and per CPU second, and the peak memory so far.  Lines
 * "result<TAB>KEY.name<TAB>value" carry the figures to bench/run.sh.
 * Prints timings; never judges them.
 */
#include "benchutil.h"
#include "twofold.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static int bench_file(const char *key, const char *path, int repeat) {
  double best_wall = 0, best_cpu = 0, rows = 0;
  size_t regions = 0;
  for (int k = 0; k < repeat; k++) {
    twofold_set *set = NULL;
    twofold_error err;
    double c0 = bench_rusage_cpu(), w0 = bench_clock(CLOCK_MONOTONIC);
    int st = twofold_read_file(path, NULL, &set, &err);
    double w1 = bench_clock(CLOCK_MONOTONIC), c1 = bench_rusage_cpu();
    if (st != 0) {
      fprintf(stderr, "bench-read: %s\n", err.text);
      return 1;
    }
    rows = 0;
    regions = twofold_set_count(set);
    for (size_t i = 0; i < regions; i++) {
      const twofold_series *s = twofold_set_at(set, i);
      rows += (double)(twofold_series_length(s) -
                       twofold_series_missing(s, 0));
    }
    twofold_set_free(set);
    if (k == 0 || w1 - w0 < best_wall) {
      best_wall = w1 - w0;
      best_cpu = c1 - c0;
    }
  }
  printf("read %-5s %s: %zu regions, %.0f rows; best of %d: wall %.3f s, "
         "CPU %.3f s; %.3g rows/s (wall), %.3g rows/s (CPU); peak %.0f MB\n",
         key, path, regions, rows, repeat, best_wall, best_cpu,
         rows / best_wall, rows / best_cpu, bench_peak_mb());
  char name[64];
  snprintf(name, sizeof name, "%s.rows", key);
  bench_result(name, rows);
  snprintf(name, sizeof name, "%s.wall_s", key);
  bench_result(name, best_wall);
  snprintf(name, sizeof name, "%s.cpu_s", key);
  bench_result(name, best_cpu);
  snprintf(name, sizeof name, "%s.rows_per_s", key);
  bench_result(name, rows / best_wall);
  snprintf(name, sizeof name, "%s.rows_per_cpu_s", key);
  bench_result(name, rows / best_cpu);
  snprintf(name, sizeof name, "%s.peak_mb", key);
  bench_result(name, bench_peak_mb());
  fflush(stdout);
  return 0;
}

int main(int argc, char **argv) {
  int repeat = 2, rc = 0, files = 0;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--repeat") == 0 && i + 1 < argc) {
      repeat = atoi(argv[++i]);
      if (repeat < 1 || repeat > 100) {
        fputs("bench-read: --repeat wants 1..100\n", stderr);
        return 2;
      }
      continue;
    }
    char *eq = strchr(argv[i], '=');
    if (eq == NULL || eq == argv[i] || eq - argv[i] > 40) {
      fputs("usage: bench-read [--repeat N] KEY=FILE ...\n", stderr);
      return 2;
    }
    *eq = '\0';
    rc |= bench_file(argv[i], eq + 1, repeat);
    files++;
  }
  if (files == 0) {
    fputs("usage: bench-read [--repeat N] KEY=FILE ...\n", stderr);
    return 2;
  }
  return rc;
}
