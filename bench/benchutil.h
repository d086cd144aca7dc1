/* SPDX-License-Identifier: GPL-3.0-or-later */
/* benchutil.h - clocks and the result lines of the benchmark programs. */
#ifndef TWOFOLD_BENCHUTIL_H
#define TWOFOLD_BENCHUTIL_H

#include <stdio.h>
#include <stdlib.h>
#include <sys/resource.h>
#include <time.h>

/* Seconds on a clock (CLOCK_MONOTONIC for wall time,
 * CLOCK_PROCESS_CPUTIME_ID or CLOCK_THREAD_CPUTIME_ID for CPU time). */
static inline double bench_clock(clockid_t id) {
  struct timespec ts;
  if (clock_gettime(id, &ts) != 0)
    return 0.0;
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* User plus system CPU seconds of the process so far (getrusage). */
static inline double bench_rusage_cpu(void) {
  struct rusage ru;
  if (getrusage(RUSAGE_SELF, &ru) != 0)
    return 0.0;
  return (double)ru.ru_utime.tv_sec + 1e-6 * (double)ru.ru_utime.tv_usec +
         (double)ru.ru_stime.tv_sec + 1e-6 * (double)ru.ru_stime.tv_usec;
}

/* Peak resident set size of the process so far, in MB (getrusage). */
static inline double bench_peak_mb(void) {
  struct rusage ru;
  if (getrusage(RUSAGE_SELF, &ru) != 0)
    return 0.0;
  return (double)ru.ru_maxrss / 1024.0;
}

/* The value of --series N for program prog: 0 and *out set for N in
 * 1..max, else 2 after a message. */
static inline int bench_series_arg(const char *prog, const char *arg,
                                   long max, size_t *out) {
  long v = atol(arg);
  if (v < 1 || v > max) {
    fprintf(stderr, "%s: --series wants 1..%ld\n", prog, max);
    return 2;
  }
  *out = (size_t)v;
  return 0;
}

/* A machine-readable figure for bench/run.sh: "result<TAB>key<TAB>value". */
static inline void bench_result(const char *key, double value) {
  printf("result\t%s\t%.6g\n", key, value);
}

#endif
