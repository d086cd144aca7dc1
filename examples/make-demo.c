/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * make-demo - write the invented demo scenario of twofold.
 *
 *   make-demo [--cases | --truth | --segments] [FILE]
 *
 * Without an option (or with --cases) it writes the daily counts,
 * examples/demo.csv; --truth writes the true changes in growth,
 * examples/truth.csv; --segments writes every region's true segments and
 * noise parameters, examples/segments.csv.  FILE defaults to standard
 * output.  The output is the same byte for byte on every run: the random
 * numbers come from GSL's MT19937 generator with the fixed seed below.
 *
 * THE SCENARIO (invented: the places and numbers resemble no real ones)
 *
 * The Province of Vellmark has six health regions.  Daily counts of
 * "cases" and "admissions" run for 400 days, 2025-09-01 (a Monday) to
 * 2026-10-05.  Layout: long CSV, header region,date,cases,admissions, rows
 * sorted by region (in the order below) then date.
 *
 * Trend.  Each region has a latent log-level eta_t, piecewise linear in
 * the day t and continuous at every change (a kink): on the days of a
 * segment eta rises by its growth rate r per day.  A change dated D means
 * eta_{t+1} - eta_t = r_before for t < D and r_after for t >= D, so D is
 * the vertex of the kink (the first day of the new slope).  eta at
 * 2025-09-01 is log(level).
 *
 *  region             level  theta  adm.frac  segments: from date, r/day
 *  Quillomere          150     30    0.040    2025-09-01  0
 *                                             2025-10-13  0.077 (doubling
 *                                                         9.0 days)
 *                                             2025-11-17 -0.035
 *                                             2026-01-19  0
 *                                             2026-05-09  0.020
 *                                             2026-07-18 -0.020
 *  Brathvenna Coast     60     25    0.035    2025-09-01  0.020
 *                                             2025-12-10 -0.020
 *                                             2026-03-20  0.010
 *  Zephrenholt         400     50    0.050    2025-09-01 -0.012 (shrinking)
 *                                             2026-02-28 -0.004
 *  Imbrelund Uplands    80     20    0.045    2025-09-01  0.005
 *                                             2025-10-31  0.045
 *                                             2025-12-30 -0.030
 *                                             2026-04-09  0
 *  Yarrowquist          50     40    0.030    2025-09-01  0.004 (no change)
 *  Maelcorrin Isles      3     30    0.040    2025-09-01  0 (a few a day)
 *                                             2026-03-20  0.015
 *                                             2026-05-19 -0.008
 *
 * Weekday reporting effect on cases (log scale, sums to zero over the
 * week, the same in every region): Monday -0.25, Tuesday +0.10,
 * Wednesday +0.12, Thursday +0.10, Friday +0.08, Saturday 0, Sunday -0.15.
 *
 * Cases on day t: negative binomial (NB2, variance mu + mu^2/theta) with
 * mean mu_t = exp(eta_t + weekday effect), drawn as a gamma-Poisson
 * mixture: lambda ~ Gamma(shape theta, scale mu_t/theta), cases ~
 * Poisson(lambda).
 *
 * Admissions on day t: Poisson with mean fraction * exp(eta_{t-7}): a
 * fixed fraction (adm.frac above, 3-5%) of the expected cases 7 days
 * earlier (lag 7 days), without a weekday effect or extra dispersion.
 * Before 2025-09-08 eta_{t-7} extends the first segment backwards.
 *
 * Missing data.  The draws are made for every region and day (cases, then
 * admissions) in the order above, whether or not the row is written, so
 * the gaps do not shift the random stream.  Then:
 *   - Brathvenna Coast 2025-12-25 and 2025-12-26: rows absent;
 *   - Quillomere 2026-04-03: row absent;
 *   - Zephrenholt 2026-01-14: admissions cell empty (cases present).
 *
 * Seed: gsl_rng_mt19937 with seed 20250901.
 */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define DEMO_SEED 20250901UL
#define DEMO_DAYS 400
#define DEMO_LAG 7
#define MAX_SEGMENTS 8

/* Start date, 2025-09-01. */
static const int start_year = 2025, start_month = 9, start_mday = 1;

struct segment {
  int start; /* day index (0 = start date) of the segment's first slope */
  double rate;
};

struct region {
  const char *name;
  double level; /* expected cases per day (before weekday) at day 0 */
  double theta; /* NB2 dispersion of cases */
  double admit_fraction;
  int nseg;
  struct segment seg[MAX_SEGMENTS];
};

/* Day indices: 2025-10-13 = 42, 2025-11-17 = 77, 2026-01-19 = 140,
 * 2026-05-09 = 250, 2026-07-18 = 320, 2025-12-10 = 100, 2026-03-20 = 200,
 * 2026-02-28 = 180, 2025-10-31 = 60, 2025-12-30 = 120, 2026-04-09 = 220,
 * 2026-05-19 = 260. */
static const struct region regions[] = {
    {"Quillomere", 150.0, 30.0, 0.040, 6,
     {{0, 0.0}, {42, 0.077}, {77, -0.035}, {140, 0.0}, {250, 0.020},
      {320, -0.020}}},
    {"Brathvenna Coast", 60.0, 25.0, 0.035, 3,
     {{0, 0.020}, {100, -0.020}, {200, 0.010}}},
    {"Zephrenholt", 400.0, 50.0, 0.050, 2, {{0, -0.012}, {180, -0.004}}},
    {"Imbrelund Uplands", 80.0, 20.0, 0.045, 4,
     {{0, 0.005}, {60, 0.045}, {120, -0.030}, {220, 0.0}}},
    {"Yarrowquist", 50.0, 40.0, 0.030, 1, {{0, 0.004}}},
    {"Maelcorrin Isles", 3.0, 30.0, 0.040, 3,
     {{0, 0.0}, {200, 0.015}, {260, -0.008}}},
};
#define NREGIONS (sizeof regions / sizeof regions[0])

/* Weekday effects by ISO weekday 1 (Monday) .. 7 (Sunday); index 0 unused. */
static const double weekday_effect[8] = {0.0,  -0.25, 0.10, 0.12,
                                         0.10, 0.08,  0.0,  -0.15};

enum gap_kind { ROW_ABSENT, ADMISSIONS_EMPTY };
struct gap {
  size_t region;
  int day;
  enum gap_kind kind;
};
/* 2025-12-25 = 115, 2025-12-26 = 116, 2026-04-03 = 214, 2026-01-14 = 135 */
static const struct gap gaps[] = {
    {1, 115, ROW_ABSENT},
    {1, 116, ROW_ABSENT},
    {0, 214, ROW_ABSENT},
    {2, 135, ADMISSIONS_EMPTY},
};
#define NGAPS (sizeof gaps / sizeof gaps[0])

/* Days since 1970-01-01 of a proleptic Gregorian date (the civil-date
 * algorithm of H. Hinnant, "chrono-compatible low-level date algorithms",
 * public domain). */
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

static void format_day(int index, char buf[32]) {
  int y, m, d;
  civil_from_days(days_from_civil(start_year, start_month, start_mday) + index,
                  &y, &m, &d);
  snprintf(buf, 32, "%04d-%02d-%02d", y, m, d);
}

/* ISO weekday 1..7 of a day index. */
static int weekday(int index) {
  long z = days_from_civil(start_year, start_month, start_mday) + index;
  /* 1970-01-01 was a Thursday (ISO 4). */
  long w = ((z % 7) + 7 + 3) % 7; /* 0 = Monday */
  return (int)w + 1;
}

/* The latent log-level eta_t of region r on day index t (any integer). */
static double eta(const struct region *r, int t) {
  double e = log(r->level);
  if (t < 0)
    return e + r->seg[0].rate * t;
  for (int k = 0; k < r->nseg; k++) {
    int a = r->seg[k].start;
    int b = k + 1 < r->nseg ? r->seg[k + 1].start : t;
    if (b > t)
      b = t;
    if (b > a)
      e += r->seg[k].rate * (b - a);
  }
  return e;
}

static int gap_at(size_t region, int day, enum gap_kind kind) {
  for (size_t i = 0; i < NGAPS; i++)
    if (gaps[i].region == region && gaps[i].day == day && gaps[i].kind == kind)
      return 1;
  return 0;
}

static int write_cases(FILE *f) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  if (rng == NULL)
    return -1;
  gsl_rng_set(rng, DEMO_SEED);
  fputs("region,date,cases,admissions\n", f);
  for (size_t i = 0; i < NREGIONS; i++) {
    const struct region *r = &regions[i];
    for (int t = 0; t < DEMO_DAYS; t++) {
      double mu = exp(eta(r, t) + weekday_effect[weekday(t)]);
      double lambda = gsl_ran_gamma(rng, r->theta, mu / r->theta);
      unsigned int cases = gsl_ran_poisson(rng, lambda);
      double amu = r->admit_fraction * exp(eta(r, t - DEMO_LAG));
      unsigned int adm = gsl_ran_poisson(rng, amu);
      if (gap_at(i, t, ROW_ABSENT))
        continue;
      char date[32];
      format_day(t, date);
      if (gap_at(i, t, ADMISSIONS_EMPTY))
        fprintf(f, "%s,%s,%u,\n", r->name, date, cases);
      else
        fprintf(f, "%s,%s,%u,%u\n", r->name, date, cases, adm);
    }
  }
  gsl_rng_free(rng);
  return 0;
}

/* One row per change: region,date,rate_before,rate_after (date = first day
 * of the new slope). */
static int write_truth(FILE *f) {
  fputs("region,date,rate_before,rate_after\n", f);
  for (size_t i = 0; i < NREGIONS; i++) {
    const struct region *r = &regions[i];
    for (int k = 1; k < r->nseg; k++) {
      char date[32];
      format_day(r->seg[k].start, date);
      fprintf(f, "%s,%s,%.3f,%.3f\n", r->name, date, r->seg[k - 1].rate,
              r->seg[k].rate);
    }
  }
  return 0;
}

/* One row per segment with the region's noise and admission parameters. */
static int write_segments(FILE *f) {
  fputs("region,first_date,last_date,rate,level_at_start,theta,"
        "admission_fraction,admission_lag\n",
        f);
  for (size_t i = 0; i < NREGIONS; i++) {
    const struct region *r = &regions[i];
    for (int k = 0; k < r->nseg; k++) {
      int a = r->seg[k].start;
      int b = k + 1 < r->nseg ? r->seg[k + 1].start - 1 : DEMO_DAYS - 1;
      char d0[32], d1[32];
      format_day(a, d0);
      format_day(b, d1);
      fprintf(f, "%s,%s,%s,%.3f,%.4f,%g,%.3f,%d\n", r->name, d0, d1,
              r->seg[k].rate, exp(eta(r, a)), r->theta, r->admit_fraction,
              DEMO_LAG);
    }
  }
  return 0;
}

static void usage(FILE *f) {
  fputs("usage: make-demo [--cases | --truth | --segments] [FILE]\n", f);
}

int main(int argc, char **argv) {
  int (*writer)(FILE *) = write_cases;
  const char *path = NULL;
  for (int i = 1; i < argc; i++) {
    if (strcmp(argv[i], "--cases") == 0)
      writer = write_cases;
    else if (strcmp(argv[i], "--truth") == 0)
      writer = write_truth;
    else if (strcmp(argv[i], "--segments") == 0)
      writer = write_segments;
    else if (strcmp(argv[i], "--help") == 0) {
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
  int rc = writer(f);
  if (rc != 0)
    fputs("make-demo: out of memory\n", stderr);
  if (fflush(f) != 0 || ferror(f)) {
    perror(path != NULL ? path : "<stdout>");
    rc = -1;
  }
  if (f != stdout && fclose(f) != 0) {
    perror(path);
    rc = -1;
  }
  return rc == 0 ? 0 : 1;
}
