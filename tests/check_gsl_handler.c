/* SPDX-License-Identifier: GPL-3.0-or-later */
/* GSL's error handler is never reached.  GSL's default handler prints and
 * calls abort() (GSL reference manual, "Error handling": "the default
 * behavior of the error handler is to print a message and abort the
 * program"); this test leaves it exactly as a host program would, and
 * feeds every entry point the worst inputs: all zeros, one count of 2^53,
 * constant series, lengths 0 and 1, NaN, infinities and negatives where
 * doubles are accepted, interval levels 0, 1 and NaN, windows longer than
 * the series.  Every call must return (any status); an abort fails the
 * test case (Check runs each case in its own process and reports the
 * signal).  The library must also not leave a handler of its own: the
 * handler in place afterwards is still GSL's default (NULL). */
#include "twofold.h"

#include <check.h>
#include <gsl/gsl_errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define BIG 9007199254740992.0 /* 2^53 */

/* The handler in place: gsl_set_error_handler returns the previous one, so
 * set it to what it was and look at that. */
static void assert_default_handler(void) {
  gsl_error_handler_t *h = gsl_set_error_handler(NULL);
  ck_assert_msg(h == NULL, "the library installed a GSL error handler");
}

/* --- series of awkward shapes ------------------------------------------- */

enum { NSHAPES = 14, MAXN = 400 };

/* Fill y with shape k (n days); returns n. */
static size_t shape(int k, double *y) {
  size_t n = 60;
  for (size_t i = 0; i < MAXN; i++)
    y[i] = 0.0;
  switch (k) {
  case 0: break;                                          /* all zeros     */
  case 1: y[30] = BIG; break;                             /* one 2^53      */
  case 2: for (size_t i = 0; i < n; i++) y[i] = 17; break; /* constant    */
  case 3: for (size_t i = 0; i < n; i++) y[i] = BIG; break; /* all 2^53   */
  case 4: n = 0; break;                                   /* empty         */
  case 5: n = 1; y[0] = 5; break;                         /* one day       */
  case 6: n = 2; y[0] = 0; y[1] = 1e6; break;             /* two days      */
  case 7: for (size_t i = 0; i < n; i++) y[i] = NAN; break; /* all missing */
  case 8: for (size_t i = 0; i < n; i++) y[i] = i < 50 ? 0 : 40; break;
  case 9: for (size_t i = 0; i < n; i++) y[i] = i % 7 == 0 ? 100 : 0; break;
  case 10: for (size_t i = 0; i < n; i++) y[i] = floor(exp(0.6 * (double)i));
    break;                                                /* explosive     */
  case 11: for (size_t i = 0; i < n; i++) y[i] = i % 2 ? 1 : NAN; break;
  case 12: n = MAXN; for (size_t i = 0; i < n; i++) y[i] = (double)(i % 3);
    break;
  default: for (size_t i = 0; i < n; i++) y[i] = i == 10 ? 1 : 0; break;
  }
  return n;
}

/* Invalid single values, placed into an otherwise good series. */
static const double bad_values[] = {NAN, INFINITY, -INFINITY, -1.0, 0.5,
                                    BIG * 2, -0.0, 1e308};
static const double levels[] = {0.0, 1.0, NAN, -1.0, 2.0, INFINITY,
                                1e-300, 1.0 - 1e-16, 0.95};

START_TEST(growth_worst_inputs) {
  double y[MAXN], off[MAXN], r[MAXN], lo[MAXN], hi[MAXN];
  int st[MAXN];
  twofold_fit *fit = NULL;
  ck_assert_int_eq(twofold_fit_new(&fit), 0);
  twofold_fit_options *o = NULL;
  ck_assert_int_eq(twofold_fit_options_new(&o), 0);
  for (int model = 0; model < 3; model++) {
    ck_assert_int_eq(twofold_fit_options_set_model(o, model), 0);
    for (int wd = 0; wd < 2; wd++) {
      twofold_fit_options_set_weekday(o, wd);
      for (int k = 0; k < NSHAPES; k++) {
        size_t n = shape(k, y);
        (void)twofold_growth_fit(fit, o, y, NULL, n, 3);
        for (int kind = 0; kind < 4; kind++) {
          double a, b;
          (void)twofold_fit_interval(fit, kind, &a, &b);
        }
        (void)twofold_growth_roll(o, y, NULL, n, 3, 7, 0, r, lo, hi, st);
        (void)twofold_growth_roll(o, y, NULL, n, 3, n + 5, 1, r, lo, hi, st);
        (void)twofold_growth_roll(o, y, NULL, n, 3, 1, 0, r, lo, hi, st);
        (void)twofold_growth_roll(o, y, NULL, n, 3, 0, 0, r, lo, hi, st);
        /* offsets: extreme and invalid */
        for (size_t i = 0; i < n; i++)
          off[i] = i % 3 == 0 ? 700.0 : (i % 3 == 1 ? -700.0 : NAN);
        (void)twofold_growth_fit(fit, o, y, off, n, 1);
        for (size_t i = 0; i < n; i++)
          off[i] = i % 2 ? INFINITY : -INFINITY;
        (void)twofold_growth_fit(fit, o, y, off, n, 7);
        (void)twofold_growth_roll(o, y, off, n, 7, 14, 1, r, lo, hi, st);
      }
      /* one bad value inside a good series */
      for (size_t b = 0; b < sizeof bad_values / sizeof *bad_values; b++) {
        size_t n = shape(10, y);
        y[20] = bad_values[b];
        (void)twofold_growth_fit(fit, o, y, NULL, 28, 2);
        (void)twofold_growth_roll(o, y, NULL, n, 2, 14, 0, r, lo, hi, st);
      }
    }
  }
  /* interval levels at and beyond the ends of (0, 1) */
  for (size_t l = 0; l < sizeof levels / sizeof *levels; l++) {
    (void)twofold_fit_options_set_level(o, levels[l]);
    size_t n = shape(2, y);
    (void)twofold_growth_fit(fit, o, y, NULL, n, 4);
    double a, b;
    for (int kind = 0; kind < 4; kind++)
      (void)twofold_fit_interval(fit, kind, &a, &b);
  }
  /* other options at their limits */
  double mins[] = {NAN, -1, 0, INFINITY, 1e300};
  for (size_t i = 0; i < 5; i++) {
    (void)twofold_fit_options_set_min_events(o, mins[i]);
    (void)twofold_fit_options_set_tolerance(o, mins[i]);
    (void)twofold_fit_options_set_max_iterations(o, (int)i - 2);
    size_t n = shape(10, y);
    (void)twofold_growth_fit(fit, o, y, NULL, n, 4);
  }
  /* NULL arguments */
  (void)twofold_growth_fit(NULL, o, y, NULL, 10, 1);
  (void)twofold_growth_fit(fit, NULL, y, NULL, 10, 1);
  (void)twofold_growth_fit(fit, o, NULL, NULL, 10, 1);
  (void)twofold_growth_roll(o, NULL, NULL, 10, 1, 7, 0, r, lo, hi, st);
  (void)twofold_growth_roll(NULL, y, NULL, 10, 1, 7, 0, r, lo, hi, st);
  twofold_fit_options_free(o);
  twofold_fit_free(fit);
  assert_default_handler();
}
END_TEST

START_TEST(doubling_worst_inputs) {
  const double v[] = {0.0, -0.0, NAN, INFINITY, -INFINITY, 1e-300, -1e-300,
                      1e300, -1e300, 0.1, -0.1};
  size_t nv = sizeof v / sizeof *v;
  for (size_t i = 0; i < nv; i++)
    for (size_t j = 0; j < nv; j++)
      for (size_t k = 0; k < nv; k++) {
        double t, a, b;
        int sense;
        (void)twofold_doubling_time(v[i], v[j], v[k], &t, &a, &b, &sense);
      }
  assert_default_handler();
}
END_TEST

START_TEST(transmission_worst_inputs) {
  const double v[] = {0.0, -0.0, NAN, INFINITY, -INFINITY, 1e-300, 1e300,
                      -1.0, 1.0, 5.0, 1e-8, 200.0};
  size_t nv = sizeof v / sizeof *v;
  for (size_t i = 0; i < nv; i++)
    for (size_t j = 0; j < nv; j++) {
      twofold_gi *gi = NULL;
      if (twofold_gi_new_gamma(v[i], v[j], &gi) != 0)
        continue;
      (void)twofold_gi_mean(gi);
      (void)twofold_gi_sd(gi);
      for (size_t k = 0; k < nv; k++) {
        double R, Rl, Rh;
        (void)twofold_gi_reproduction(gi, v[k], &R);
        (void)twofold_gi_reproduction(gi, -v[k], &R);
        (void)twofold_gi_reproduction_interval(gi, v[k], -v[k], v[k], &R,
                                               &Rl, &Rh);
      }
      twofold_gi_free(gi);
    }
  /* discrete intervals: zeros, NaN, negative, one point, empty */
  double p[6][5] = {{0, 0, 0, 0, 0},
                    {NAN, 1, 1, 1, 1},
                    {-1, 2, 0, 0, 0},
                    {1, 0, 0, 0, 0},
                    {INFINITY, 1, 0, 0, 0},
                    {1e-300, 1e-300, 0, 0, 1e300}};
  for (int i = 0; i < 6; i++)
    for (size_t n = 0; n <= 5; n++) {
      twofold_gi *gi = NULL;
      if (twofold_gi_new_discrete(p[i], n, &gi) != 0)
        continue;
      for (size_t k = 0; k < nv; k++) {
        double R, Rl, Rh;
        (void)twofold_gi_reproduction(gi, v[k], &R);
        (void)twofold_gi_reproduction_interval(gi, v[k], v[k] - 1, v[k] + 1,
                                               &R, &Rl, &Rh);
      }
      twofold_gi_free(gi);
    }
  (void)twofold_gi_new_discrete(NULL, 3, NULL);
  (void)twofold_gi_reproduction(NULL, 0.1, NULL);
  assert_default_handler();
}
END_TEST

START_TEST(series_and_reader_worst_inputs) {
  double y[MAXN];
  twofold_set *set = NULL;
  ck_assert_int_eq(twofold_set_new(&set), 0);
  for (int k = 0; k < NSHAPES; k++) {
    size_t n = shape(k, y);
    twofold_series *s = NULL;
    char name[16];
    snprintf(name, sizeof name, "r%d", k);
    if (twofold_series_from_counts(name, TWOFOLD_DAY_MAX - (int32_t)n, y, n,
                                   "cases", &s) == 0) {
      (void)twofold_series_total(s, 0);
      (void)twofold_series_gaps(s, 0);
      if (twofold_set_add(set, s) != 0)
        twofold_series_free(s);
    }
  }
  twofold_series *tot = NULL;
  (void)twofold_set_total(set, "all", &tot);
  twofold_series_free(tot);
  twofold_set_free(set);
  /* dates at and beyond the ends of the range */
  int32_t d;
  (void)twofold_date_from_ymd(0, 1, 1, &d);
  (void)twofold_date_from_ymd(10000, 1, 1, &d);
  (void)twofold_date_from_ymd(2021, 2, 29, &d);
  (void)twofold_date_to_ymd(INT32_MIN, NULL, NULL, NULL);
  (void)twofold_date_weekday(INT32_MIN);
  (void)twofold_date_weekday(INT32_MAX);
  /* hostile CSV: huge counts, huge dates, NUL, broken gzip */
  static const char *csv[] = {
      "region,date,cases\na,2020-01-01,9007199254740992\n"
      "a,2020-01-02,9007199254740993\n",
      "region,date,cases\na,0001-01-01,1\na,9999-12-31,1\n",
      "region,date,cases\na,2020-01-01,1e400\n",
      "region,date,cases\na,2020-01-01,nan\n",
      "region,date,cases\na,2020-01-01,-0\n",
      "date,a,b\n2020-01-01,,\n2020-01-02,0,0\n",
      "\x1f\x8b\x08\x00\x00\x00\x00\x00\x00\x03",
      "region,date,cases\na,2020-01-01,\0\n",
  };
  for (size_t i = 0; i < sizeof csv / sizeof *csv; i++) {
    size_t len = strlen(csv[i]);
    if (i == 7) /* through the NUL byte and the newline after it */
      len = sizeof "region,date,cases\na,2020-01-01,\0\n" - 1;
    twofold_set *out = NULL;
    twofold_error err;
    (void)twofold_read_memory(csv[i], len, "worst.csv", NULL, &out, &err);
    twofold_set_free(out);
  }
  assert_default_handler();
}
END_TEST

int main(void) {
  Suite *suite = suite_create("gsl_handler");
  TCase *tc = tcase_create("default_handler");
  tcase_set_timeout(tc, 300);
  tcase_add_test(tc, growth_worst_inputs);
  tcase_add_test(tc, doubling_worst_inputs);
  tcase_add_test(tc, transmission_worst_inputs);
  tcase_add_test(tc, series_and_reader_worst_inputs);
  suite_add_tcase(suite, tc);
  SRunner *sr = srunner_create(suite);
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
