/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * make-bench-data - write the invented benchmark file of twofold.
 *
 *   make-bench-data [--regions N] [--days N] [FILE]
 *
 * Long-layout CSV, header region,date,cases,admissions, rows sorted by
 * district then date: by default 10,000 districts ("district-00001" ..
 * "district-10000") over 730 days from 2024-01-01, about 7.3 million rows
 * (a row is left out now and then: a missing day).  The numbers come from
 * benchgen.c (GSL MT19937, fixed seeds), so every run writes the same bytes.
 * FILE defaults to standard output; compress it with gzip for the gzip
 * figures (bench/run.sh does).
 */
#include "benchgen.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Days since 1970-01-01 of a proleptic Gregorian date and back (the
 * civil-date algorithms of H. Hinnant, "chrono-compatible low-level date
 * algorithms", public domain). */
static long days_from_civil(int y, int m, int d) {
  y -= m <= 2;
  long era = (y >= 0 ? y : y - 399) / 400;
  long yoe = y - era * 400;
  long doy = (153L * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
  long doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
  return era * 146097 + doe - 719468;
}

static void civil_from_days(long z, int *y, int *m, int *d) {
  z += 719468;
  long era = (z >= 0 ? z : z - 146096) / 146097;
  long doe = z - era * 146097;
  long yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
  long yy = yoe + era * 400;
  long doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
  long mp = (5 * doy + 2) / 153;
  *d = (int)(doy - (153 * mp + 2) / 5 + 1);
  *m = (int)(mp < 10 ? mp + 3 : mp - 9);
  *y = (int)(yy + (*m <= 2));
}

static int parse_size(const char *s, size_t max, size_t *out) {
  char *end;
  errno = 0;
  unsigned long long v = strtoull(s, &end, 10);
  if (errno != 0 || end == s || *end != '\0' || v < 1 || v > max ||
      s[0] == '-')
    return -1;
  *out = (size_t)v;
  return 0;
}

static void usage(FILE *f) {
  fputs("usage: make-bench-data [--regions N] [--days N] [FILE]\n", f);
}

int main(int argc, char **argv) {
  size_t regions = BENCHGEN_REGIONS, days = BENCHGEN_DAYS;
  const char *path = NULL;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--regions") == 0 && i + 1 < argc) {
      if (parse_size(argv[++i], 99999, &regions) != 0) {
        usage(stderr);
        return 2;
      }
    } else if (strcmp(argv[i], "--days") == 0 && i + 1 < argc) {
      if (parse_size(argv[++i], 100000, &days) != 0) {
        usage(stderr);
        return 2;
      }
    } else if (strcmp(argv[i], "--help") == 0) {
      usage(stdout);
      return 0;
    } else if (argv[i][0] == '-' && argv[i][1] != '\0') {
      usage(stderr);
      return 2;
    } else if (path == NULL)
      path = argv[i];
    else {
      usage(stderr);
      return 2;
    }
  }
  FILE *f = stdout;
  if (path != NULL && strcmp(path, "-") != 0) {
    f = fopen(path, "w");
    if (f == NULL) {
      perror(path);
      return 1;
    }
  }
  char (*date)[11] = malloc(days * sizeof *date);
  double *cases = malloc(days * sizeof *cases);
  double *adm = malloc(days * sizeof *adm);
  int rc = 0;
  if (date == NULL || cases == NULL || adm == NULL) {
    fputs("make-bench-data: out of memory\n", stderr);
    rc = 1;
    goto done;
  }
  long first = days_from_civil(BENCHGEN_START_YEAR, BENCHGEN_START_MONTH,
                               BENCHGEN_START_MDAY);
  for (size_t t = 0; t < days; t++) {
    int y, m, d;
    civil_from_days(first + (long)t, &y, &m, &d);
    snprintf(date[t], sizeof date[t], "%04d-%02d-%02d", y, m, d);
  }
  fputs("region,date,cases,admissions\n", f);
  for (size_t i = 0; i < regions && rc == 0; i++) {
    char name[32];
    benchgen_name(i, name, sizeof name);
    if (benchgen_region(i, days, cases, adm) != 0) {
      fputs("make-bench-data: out of memory\n", stderr);
      rc = 1;
      break;
    }
    for (size_t t = 0; t < days; t++)
      if (!isnan(cases[t]))
        fprintf(f, "%s,%s,%.0f,%.0f\n", name, date[t], cases[t], adm[t]);
  }
done:
  free(date);
  free(cases);
  free(adm);
  if (fflush(f) != 0 || ferror(f)) {
    perror(path != NULL ? path : "<stdout>");
    rc = 1;
  }
  if (f != stdout && fclose(f) != 0) {
    perror(path);
    rc = 1;
  }
  return rc;
}
