/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Unit tests of the growth module: enum names, options, edge-case
 * statuses, the doubling-time mapping, NULL-safety, rolling == single fit
 * (every window, to 1e-9 standard errors, on two series),
 * the closed-form geometric sums against direct sums, and a series with a
 * constant 9-day doubling time. */
#include "twofold.h"

#include <check.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static const double LN2 = 0.69314718055994530942;

/* a deterministic overdispersed-looking series with weekday effects */
static void make_series(double *y, size_t n, double level, double r,
                        int fwd) {
  static const double eff[7] = {0.1, 0.05, 0.0, 0.02, 0.03, -0.08, -0.12};
  static const double wig[11] = {0.9, 1.15, 0.97, 1.08, 0.85, 1.2,
                                 1.0, 0.92, 1.1,  0.95, 1.05};
  for (size_t t = 0; t < n; t++)
    y[t] = floor(level * exp(r * (double)t + eff[(fwd - 1 + t) % 7]) *
                     wig[t % 11] +
                 0.5);
}

static twofold_fit_options *opts(int model, int weekday) {
  twofold_fit_options *o;
  ck_assert_int_eq(twofold_fit_options_new(&o), 0);
  ck_assert_int_eq(twofold_fit_options_set_model(o, model), 0);
  ck_assert_int_eq(twofold_fit_options_set_weekday(o, weekday), 0);
  return o;
}

/* --- enum names --------------------------------------------------------- */

START_TEST(enum_round_trip) {
  for (int m = 0; m < 3; m++)
    ck_assert_int_eq(twofold_model_from_string(twofold_model_to_string(m)),
                     m);
  for (int k = 0; k < 4; k++)
    ck_assert_int_eq(
        twofold_interval_from_string(twofold_interval_to_string(k)), k);
  for (int a = 0; a < 2; a++)
    ck_assert_int_eq(twofold_align_from_string(twofold_align_to_string(a)),
                     a);
  ck_assert_str_eq(twofold_model_to_string(TWOFOLD_MODEL_NEGBIN), "negbin");
  ck_assert_str_eq(twofold_interval_to_string(TWOFOLD_INTERVAL_SMALL),
                   "small");
  ck_assert_str_eq(twofold_align_to_string(TWOFOLD_ALIGN_CENTRED),
                   "centred");
  ck_assert_ptr_null(twofold_model_to_string(3));
  ck_assert_ptr_null(twofold_model_to_string(-1));
  ck_assert_ptr_null(twofold_interval_to_string(4));
  ck_assert_ptr_null(twofold_align_to_string(2));
  ck_assert_int_eq(twofold_model_from_string("Poisson"), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_model_from_string(NULL), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_interval_from_string(""), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_align_from_string("centered"), TWOFOLD_EINVAL);
}
END_TEST

/* --- options ------------------------------------------------------------ */

START_TEST(options_defaults_and_validation) {
  twofold_fit_options *o, *c;
  ck_assert_int_eq(twofold_fit_options_new(&o), 0);
  ck_assert_int_eq(twofold_fit_options_get_model(o), TWOFOLD_MODEL_NEGBIN);
  ck_assert(twofold_fit_options_get_level(o) == 0.95);
  ck_assert_int_eq(twofold_fit_options_get_weekday(o), 1);
  ck_assert_int_eq(twofold_fit_options_get_interval(o),
                   TWOFOLD_INTERVAL_DEFAULT);
  ck_assert(twofold_fit_options_get_min_events(o) ==
            TWOFOLD_MIN_EVENTS_DEFAULT);
  ck_assert_int_eq(twofold_fit_options_get_max_iterations(o), 50);
  ck_assert(twofold_fit_options_get_tolerance(o) == 1e-10);
  ck_assert_int_eq(twofold_fit_options_set_level(o, 0.0), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_level(o, 1.0), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_level(o, -0.5), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_level(o, NAN), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_level(o, 0.9), 0);
  ck_assert(twofold_fit_options_get_level(o) == 0.9);
  ck_assert_int_eq(twofold_fit_options_set_model(o, 3), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_interval(o, 4), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_weekday(o, 2), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_min_events(o, -1),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_max_iterations(o, 0),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_tolerance(o, 0.0),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_copy(o, &c), 0);
  ck_assert(twofold_fit_options_get_level(c) == 0.9);
  twofold_fit_options_free(c);
  twofold_fit_options_free(o);
}
END_TEST

START_TEST(null_safety) {
  twofold_fit_options_free(NULL);
  twofold_fit_free(NULL);
  ck_assert_int_eq(twofold_fit_options_new(NULL), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_new(NULL), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_options_set_level(NULL, 0.9), TWOFOLD_EINVAL);
  ck_assert(isnan(twofold_fit_options_get_level(NULL)));
  ck_assert_int_eq(twofold_growth_fit(NULL, NULL, NULL, NULL, 0, 1),
                   TWOFOLD_EINVAL);
  ck_assert(isnan(twofold_fit_rate(NULL)));
  ck_assert(isnan(twofold_fit_rate_se(NULL)));
  ck_assert_int_eq(twofold_fit_status(NULL), TWOFOLD_EINVAL);
  ck_assert_ptr_nonnull(twofold_fit_errmsg(NULL));
  double lo, hi;
  ck_assert_int_eq(twofold_fit_interval(NULL, 0, &lo, &hi), TWOFOLD_EINVAL);
  twofold_fit *f;
  ck_assert_int_eq(twofold_fit_new(&f), 0);
  ck_assert_int_eq(twofold_growth_fit(f, NULL, NULL, NULL, 21, 1),
                   TWOFOLD_EINVAL);
  ck_assert_str_ne(twofold_fit_errmsg(f), "");
  double y[21];
  make_series(y, 21, 30, 0.05, 1);
  ck_assert_int_eq(twofold_growth_fit(f, NULL, y, NULL, 21, 8),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_growth_fit(f, NULL, y, NULL, 21, 1), 0);
  ck_assert_str_eq(twofold_fit_errmsg(f), "");
  ck_assert_int_eq(twofold_fit_interval(f, 4, &lo, &hi), TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_fit_interval(f, 0, NULL, NULL), 0);
  twofold_fit_free(f);
}
END_TEST

/* --- edge cases ---------------------------------------------------------- */

static int fit_status(int model, int weekday, const double *y, size_t n,
                      int fwd, twofold_fit *f) {
  twofold_fit_options *o = opts(model, weekday);
  int rc = twofold_growth_fit(f, o, y, NULL, n, fwd);
  twofold_fit_options_free(o);
  ck_assert_int_eq(rc, twofold_fit_status(f));
  if (rc)
    ck_assert_str_ne(twofold_fit_errmsg(f), "");
  return rc;
}

START_TEST(edge_statuses) {
  twofold_fit *f;
  ck_assert_int_eq(twofold_fit_new(&f), 0);
  for (int model = 0; model < 3; model++) {
    double y[28];
    /* all zero */
    for (int t = 0; t < 28; t++)
      y[t] = 0;
    ck_assert_int_eq(fit_status(model, 1, y, 28, 1, f), TWOFOLD_EZERO);
    /* few events: 10 < 20 */
    y[3] = 4;
    y[10] = 3;
    y[20] = 3;
    ck_assert_int_eq(fit_status(model, 0, y, 28, 1, f), TWOFOLD_EFEWEVENTS);
    /* too few days for the parameters: 8 days, weekday effects on */
    for (int t = 0; t < 28; t++)
      y[t] = 10 + t;
    ck_assert_int_eq(fit_status(model, 1, y, 8, 1, f), TWOFOLD_ENODATA);
    /* all missing */
    for (int t = 0; t < 28; t++)
      y[t] = NAN;
    ck_assert_int_eq(fit_status(model, 0, y, 28, 1, f), TWOFOLD_ENODATA);
    /* weekday absent: every Sunday missing */
    make_series(y, 28, 30, 0.02, 1);
    for (int t = 6; t < 28; t += 7)
      y[t] = NAN;
    ck_assert_int_eq(fit_status(model, 1, y, 28, 1, f), TWOFOLD_EWEEKDAY);
    ck_assert_ptr_nonnull(strstr(twofold_fit_errmsg(f), "Sunday"));
    /* ... fine with weekday effects off, flagged missing */
    ck_assert_int_eq(fit_status(model, 0, y, 28, 1, f), 0);
    ck_assert_uint_eq(twofold_fit_flags(f) & TWOFOLD_FIT_MISSING_DAYS,
                      TWOFOLD_FIT_MISSING_DAYS);
    ck_assert_uint_eq(twofold_fit_days_missing(f), 4);
    ck_assert_uint_eq(twofold_fit_days_used(f), 24);
    /* separation: zeros, then events only on the last day */
    for (int t = 0; t < 28; t++)
      y[t] = 0;
    y[27] = 50;
    ck_assert_int_eq(fit_status(model, 0, y, 28, 1, f), TWOFOLD_ESEPARATION);
    /* with weekday effects: zeros, then a last week of events */
    for (int t = 21; t < 28; t++)
      y[t] = 10;
    ck_assert_int_eq(fit_status(model, 1, y, 28, 1, f), TWOFOLD_ESEPARATION);
    /* ... but a finite MLE without weekday effects */
    ck_assert_int_eq(fit_status(model, 0, y, 28, 1, f), 0);
    /* positives then zeros */
    for (int t = 0; t < 28; t++)
      y[t] = t < 7 ? 10 : 0;
    ck_assert_int_eq(fit_status(model, 1, y, 28, 1, f), TWOFOLD_ESEPARATION);
    /* a weekday without events */
    make_series(y, 28, 30, 0.02, 1);
    for (int t = 2; t < 28; t += 7)
      y[t] = 0;
    ck_assert_int_eq(fit_status(model, 1, y, 28, 1, f), TWOFOLD_ESEPARATION);
    ck_assert_ptr_nonnull(strstr(twofold_fit_errmsg(f), "Wednesday"));
    /* invalid count */
    make_series(y, 28, 30, 0.02, 1);
    y[5] = -1;
    ck_assert_int_eq(fit_status(model, 1, y, 28, 1, f), TWOFOLD_ECOUNT);
    y[5] = 2.5;
    ck_assert_int_eq(fit_status(model, 1, y, 28, 1, f), TWOFOLD_ECOUNT);
    /* non-convergence: one Newton iteration allowed */
    make_series(y, 28, 30, 0.08, 1);
    twofold_fit_options *o = opts(model, 1);
    twofold_fit_options_set_max_iterations(o, 1);
    ck_assert_int_eq(twofold_growth_fit(f, o, y, NULL, 28, 1),
                     TWOFOLD_ENOCONV);
    ck_assert_str_ne(twofold_fit_errmsg(f), "");
    twofold_fit_options_free(o);
  }
  twofold_fit_free(f);
}
END_TEST

START_TEST(large_counts_and_capped_theta) {
  twofold_fit *f;
  ck_assert_int_eq(twofold_fit_new(&f), 0);
  double y[28];
  /* huge counts: about 1e14 a day, 3e15 in the window */
  for (int t = 0; t < 28; t++)
    y[t] = floor(1e14 * exp(0.03 * t));
  ck_assert_int_eq(fit_status(TWOFOLD_MODEL_POISSON, 0, y, 28, 1, f), 0);
  ck_assert_uint_eq(twofold_fit_flags(f) & TWOFOLD_FIT_LARGE_COUNTS,
                    TWOFOLD_FIT_LARGE_COUNTS);
  /* the generating rate, from the log of the floored values: within the
   * tiny SE of such counts plus the flooring (relative 1e-14) */
  ck_assert(fabs(twofold_fit_rate(f) - 0.03) < 1e-9);
  /* underdispersed counts: theta runs to the cap */
  for (int t = 0; t < 28; t++)
    y[t] = 100;
  ck_assert_int_eq(fit_status(TWOFOLD_MODEL_NEGBIN, 0, y, 28, 1, f), 0);
  ck_assert_uint_eq(twofold_fit_flags(f) & TWOFOLD_FIT_THETA_CAPPED,
                    TWOFOLD_FIT_THETA_CAPPED);
  ck_assert(fabs(twofold_fit_rate(f)) < 1e-9);
  ck_assert(twofold_fit_theta(f) >= 1e7);
  twofold_fit_free(f);
}
END_TEST

/* --- doubling time --------------------------------------------------------- */

START_TEST(doubling_mapping) {
  double T, lo, hi;
  int s;
  /* growing, interval above 0 */
  ck_assert_int_eq(twofold_doubling_time(0.1, 0.05, 0.2, &T, &lo, &hi, &s),
                   0);
  ck_assert_int_eq(s, 1);
  ck_assert_double_eq_tol(T, LN2 / 0.1, 1e-15);
  ck_assert_double_eq_tol(lo, LN2 / 0.2, 1e-15);
  ck_assert_double_eq_tol(hi, LN2 / 0.05, 1e-15);
  /* growing, interval reaching below 0: unbounded upper end */
  ck_assert_int_eq(twofold_doubling_time(0.1, -0.05, 0.2, &T, &lo, &hi, &s),
                   0);
  ck_assert_int_eq(s, 1);
  ck_assert_double_eq_tol(lo, LN2 / 0.2, 1e-15);
  ck_assert(isinf(hi) && hi > 0);
  /* declining */
  ck_assert_int_eq(
      twofold_doubling_time(-0.1, -0.2, -0.05, &T, &lo, &hi, &s), 0);
  ck_assert_int_eq(s, -1);
  ck_assert_double_eq_tol(T, LN2 / 0.1, 1e-15);
  ck_assert_double_eq_tol(lo, LN2 / 0.2, 1e-15);
  ck_assert_double_eq_tol(hi, LN2 / 0.05, 1e-15);
  /* declining, interval reaching above 0 */
  ck_assert_int_eq(twofold_doubling_time(-0.1, -0.2, 0.05, &T, &lo, &hi, &s),
                   0);
  ck_assert_int_eq(s, -1);
  ck_assert_double_eq_tol(lo, LN2 / 0.2, 1e-15);
  ck_assert(isinf(hi) && hi > 0);
  /* zero */
  ck_assert_int_eq(twofold_doubling_time(0.0, -0.1, 0.1, &T, &lo, &hi, &s),
                   0);
  ck_assert_int_eq(s, 0);
  ck_assert(isinf(T) && T > 0);
  ck_assert_double_eq_tol(lo, LN2 / 0.1, 1e-15);
  ck_assert(isinf(hi));
  /* degenerate interval at 0 */
  ck_assert_int_eq(twofold_doubling_time(0.0, 0.0, 0.0, &T, &lo, &hi, &s),
                   0);
  ck_assert(isinf(T) && isinf(lo) && isinf(hi));
  /* never NaN or negative over a grid of sign cases */
  const double v[] = {-0.3, -0.01, 0.0, 0.01, 0.3};
  for (int i = 0; i < 5; i++)
    for (int j = i; j < 5; j++)
      for (int k = i; k <= j; k++) {
        ck_assert_int_eq(
            twofold_doubling_time(v[k], v[i], v[j], &T, &lo, &hi, &s), 0);
        ck_assert(!isnan(T) && !isnan(lo) && !isnan(hi));
        ck_assert(T > 0 && lo > 0 && hi > 0 && lo <= hi);
      }
  /* NULL outputs allowed; invalid inputs refused */
  ck_assert_int_eq(twofold_doubling_time(0.1, 0.0, 0.2, NULL, NULL, NULL,
                                         NULL),
                   0);
  ck_assert_int_eq(twofold_doubling_time(NAN, 0.0, 0.2, &T, &lo, &hi, &s),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_doubling_time(0.1, 0.2, 0.3, &T, &lo, &hi, &s),
                   TWOFOLD_EINVAL);
}
END_TEST

/* Constant doubling every 9 days (a common-practice figure, no source):
 * y_t = round(40 * 2^(t/9)), Poisson without weekday effects; ln 2 / r
 * near 9 and 9 inside the doubling-time interval of every kind. */
START_TEST(nine_day_doubling) {
  double y[28];
  for (int t = 0; t < 28; t++)
    y[t] = floor(40.0 * pow(2.0, t / 9.0) + 0.5);
  for (int model = 0; model < 3; model++) {
    twofold_fit *f;
    ck_assert_int_eq(twofold_fit_new(&f), 0);
    ck_assert_int_eq(fit_status(model, 0, y, 28, 3, f), 0);
    double T, lo, hi, rlo, rhi;
    int s;
    for (int k = 0; k < 4; k++) {
      ck_assert_int_eq(twofold_fit_interval(f, k, &rlo, &rhi), 0);
      ck_assert_int_eq(twofold_doubling_time(twofold_fit_rate(f), rlo, rhi,
                                             &T, &lo, &hi, &s),
                       0);
      ck_assert_int_eq(s, 1);
      ck_assert_double_eq_tol(T, LN2 / twofold_fit_rate(f), 1e-12);
      ck_assert(fabs(T - 9.0) < 0.05);
      ck_assert(lo < 9.0 && 9.0 < hi);
    }
    twofold_fit_free(f);
  }
}
END_TEST

/* --- rolling == single fits ------------------------------------------------ */

/* shape 0: rise and fall from 25 a day; shape 1: steep rise (about
 * 0.12 a day) from 4 a day, then a decline */
static void roll_vs_fit_shape(int shape, int model, int weekday, int kind,
                              int align, size_t w, int with_missing,
                              int with_offset) {
  enum { N = 80 };
  double y[N], off[N];
  make_series(y, N, shape ? 4 : 25, 0.0, 3);
  for (size_t t = 0; t < N; t++) {
    double tt = (double)t;
    double g = shape ? (t < 45 ? 0.12 * tt : 5.4 - 0.07 * (tt - 45.0))
                     : 0.04 * tt - 0.0012 * tt * tt;
    y[t] = floor(y[t] * exp(g) + 0.5);
    off[t] = 0.1 * sin(tt);
  }
  if (with_missing) {
    y[30] = NAN;
    y[31] = NAN;
    y[55] = NAN;
  }
  twofold_fit_options *o = opts(model, weekday);
  ck_assert_int_eq(twofold_fit_options_set_interval(o, kind), 0);
  double rate[N], lo[N], hi[N];
  int st[N];
  const double *op = with_offset ? off : NULL;
  ck_assert_int_eq(twofold_growth_roll(o, y, op, N, 3, w, align, rate, lo,
                                       hi, st),
                   0);
  twofold_fit *f;
  ck_assert_int_eq(twofold_fit_new(&f), 0);
  int checked = 0;
  for (size_t i = 0; i < N; i++) {
    long s = align == TWOFOLD_ALIGN_TRAILING ? (long)i - (long)w + 1
                                              : (long)i - (long)((w - 1) / 2);
    if (s < 0 || (size_t)s + w > N) {
      ck_assert_int_eq(st[i], TWOFOLD_ENODATA);
      ck_assert(isnan(rate[i]));
      continue;
    }
    int fwd = 1 + (int)((2 + (size_t)s) % 7);
    int rc = twofold_growth_fit(f, o, y + s, op ? op + s : NULL, w, fwd);
    ck_assert_int_eq(rc, st[i]);
    if (rc)
      continue;
    double flo, fhi;
    twofold_fit_interval(f, TWOFOLD_INTERVAL_DEFAULT, &flo, &fhi);
    /* Poisson: 1e-9 standard errors or 1e-10 relative (the single fit's
     * own root tolerance is 1e-11 relative to |r| + the half-width); NB2,
     * whose alternating fit stops on 1e-10 steps in log theta: 1e-8
     * relative to max(|r|, SE), the agreement promised for rolling fits */
    double se = twofold_fit_rate_se(f);
    double tol = model == TWOFOLD_MODEL_NEGBIN
                     ? 1e-8 * fmax(fabs(twofold_fit_rate(f)), se)
                     : 1e-9 * se + 1e-10 * fabs(twofold_fit_rate(f)) + 1e-13;
    ck_assert_msg(fabs(rate[i] - twofold_fit_rate(f)) <= tol,
                  "day %zu model %d: roll %.15g fit %.15g", i, model, rate[i],
                  twofold_fit_rate(f));
    ck_assert_msg(fabs(lo[i] - flo) <= tol && fabs(hi[i] - fhi) <= tol,
                  "day %zu model %d weekday %d kind %d: roll [%.15g, %.15g] "
                  "fit [%.15g, %.15g]",
                  i, model, weekday, kind, lo[i], hi[i], flo, fhi);
    checked++;
  }
  ck_assert_int_gt(checked, 20);
  twofold_fit_free(f);
  twofold_fit_options_free(o);
}

static void roll_vs_fit(int model, int weekday, int kind, int align,
                        size_t w, int with_missing, int with_offset) {
  roll_vs_fit_shape(0, model, weekday, kind, align, w, with_missing,
                    with_offset);
}

START_TEST(roll_equals_fit) {
  for (int model = 0; model < 3; model++)
    for (int wk = 0; wk < 2; wk++) {
      roll_vs_fit(model, wk, TWOFOLD_INTERVAL_DEFAULT,
                  TWOFOLD_ALIGN_TRAILING, 21, 0, 0);
      roll_vs_fit(model, wk, TWOFOLD_INTERVAL_WALD, TWOFOLD_ALIGN_CENTRED,
                  28, 1, 0);
    }
  roll_vs_fit(TWOFOLD_MODEL_POISSON, 1, TWOFOLD_INTERVAL_PROFILE,
              TWOFOLD_ALIGN_CENTRED, 22, 0, 1);
  roll_vs_fit(TWOFOLD_MODEL_QUASIPOISSON, 1, TWOFOLD_INTERVAL_DEFAULT,
              TWOFOLD_ALIGN_TRAILING, 25, 1, 0);
  roll_vs_fit(TWOFOLD_MODEL_NEGBIN, 1, TWOFOLD_INTERVAL_PROFILE,
              TWOFOLD_ALIGN_TRAILING, 21, 0, 1);
  /* a second series: every model and interval kind, with and without
   * weekday effects and missing days; windows with a remainder of days
   * (two class lengths) and a long window without weekday effects (the
   * closed-form class sums) */
  for (int model = 0; model < 3; model++)
    for (int wk = 0; wk < 2; wk++)
      for (int kind = 0; kind < 4; kind++) {
        roll_vs_fit_shape(1, model, wk, kind, TWOFOLD_ALIGN_TRAILING, 24, 0,
                          0);
        roll_vs_fit_shape(1, model, wk, kind, TWOFOLD_ALIGN_CENTRED, 19, 1,
                          0);
      }
  /* short windows with missing days: classes of one or two days, some
   * of them wholly missing (the weekday status), each class its own
   * group in the rolling sums */
  for (int model = 0; model < 2; model++)
    for (int kind = 0; kind < 4; kind++)
      roll_vs_fit_shape(1, model, 1, kind, TWOFOLD_ALIGN_TRAILING, 10, 1, 0);
  roll_vs_fit_shape(1, TWOFOLD_MODEL_POISSON, 0, TWOFOLD_INTERVAL_DEFAULT,
                    TWOFOLD_ALIGN_TRAILING, 56, 0, 0);
  roll_vs_fit_shape(0, TWOFOLD_MODEL_POISSON, 0, TWOFOLD_INTERVAL_WALD,
                    TWOFOLD_ALIGN_CENTRED, 50, 0, 0);
}
END_TEST

/* Rolling 21-day windows across the edge cases, against single fits of
 * the same windows (the rolling Poisson fit of complete 21-day windows
 * with weekday effects has a path of its own; this is its check): all
 * zeros, too few events, a weekday without events, zeros then events only
 * on the last day of each weekday, events only on the first days then
 * zeros, a missing day, large counts, steep growth and decline, and
 * small counts (few events per window, where the interval ends are
 * furthest from their quadratic start).  The statuses are the same, the
 * estimates and intervals agree as in roll_vs_fit_shape. */
START_TEST(roll_edges_equal_fit) {
  enum { N = 330 };
  double y[N];
  int seen[4] = {0, 0, 0, 0}; /* OK, EZERO, EFEWEVENTS, ESEPARATION */
  make_series(y, N, 30, 0.0, 3);
  for (size_t t = 0; t < N; t++) {
    double tt = (double)t;
    if (t < 30)
      y[t] = 0.0;
    else if (t < 60)
      y[t] = t % 5 == 0 ? 1.0 : 0.0;
    else if (t < 90)
      y[t] = (t + 2) % 7 == 3 ? 0.0 : y[t];
    else if (t < 110)
      y[t] = 0.0;
    else if (t < 124)
      y[t] = 5.0 + (double)(t % 3);
    else if (t < 151)
      y[t] = 0.0;
    else if (t < 200)
      y[t] = floor(y[t] * exp(0.15 * (tt - 151.0)) + 0.5);
    else if (t < 240)
      y[t] = floor(2e6 * exp(-0.2 * (tt - 200.0)) * (1.0 + 0.1 * sin(tt)));
    else if (t < 280)
      y[t] = floor(1.0 + 2.0 * (1.0 + sin(0.7 * tt)));
    else if (t < 300)
      y[t] = floor(3.0 + 0.1 * tt * (1.0 + cos(tt)));
  }
  y[165] = NAN;
  for (int model = 0; model < 2; model++)
    for (int kind = 0; kind < 4; kind++) {
      twofold_fit_options *o = opts(model, 1);
      ck_assert_int_eq(twofold_fit_options_set_interval(o, kind), 0);
      double rate[N], lo[N], hi[N];
      int st[N];
      ck_assert_int_eq(twofold_growth_roll(o, y, NULL, N, 3, 21,
                                           TWOFOLD_ALIGN_TRAILING, rate, lo,
                                           hi, st),
                       0);
      twofold_fit *f;
      ck_assert_int_eq(twofold_fit_new(&f), 0);
      for (size_t i = 20; i < N; i++) {
        size_t s = i - 20;
        int fwd = 1 + (int)((2 + s) % 7);
        int rc = twofold_growth_fit(f, o, y + s, NULL, 21, fwd);
        ck_assert_msg(rc == st[i], "day %zu: roll status %d fit %d", i,
                      st[i], rc);
        seen[0] += rc == 0;
        seen[1] += rc == TWOFOLD_EZERO;
        seen[2] += rc == TWOFOLD_EFEWEVENTS;
        seen[3] += rc == TWOFOLD_ESEPARATION;
        if (rc)
          continue;
        double flo, fhi;
        twofold_fit_interval(f, TWOFOLD_INTERVAL_DEFAULT, &flo, &fhi);
        double se = twofold_fit_rate_se(f), r = twofold_fit_rate(f);
        double tol = 1e-9 * se + 1e-10 * fabs(r) + 1e-13;
        ck_assert_msg(fabs(rate[i] - r) <= tol && fabs(lo[i] - flo) <= tol &&
                          fabs(hi[i] - fhi) <= tol,
                      "day %zu model %d kind %d: roll %.15g [%.15g, %.15g] "
                      "fit %.15g [%.15g, %.15g]",
                      i, model, kind, rate[i], lo[i], hi[i], r, flo, fhi);
      }
      twofold_fit_free(f);
      twofold_fit_options_free(o);
    }
  for (int k = 0; k < 4; k++)
    ck_assert_int_gt(seen[k], 0);
}
END_TEST

/* NB2 rolling fits take several warm-started paths (joint Newton; theta
 * at its cap; the Cox-Reid search from the ML fit, from a far guess, or
 * ended at once when the adjusted score is non-negative at the ML fit,
 * or, from a far guess climbing into the flat tail, decided at the ML
 * fit: a window whose adjusted theta is the capped ML value right after
 * one whose adjusted theta lay far below):
 * a 240-day series whose first half is overdispersed (a deterministic
 * multiplicative wiggle, no source) and whose second half follows a
 * smooth curve with small counts (ML theta at the cap), every window
 * compared with the single fit as roll_vs_fit_shape does (1e-8 relative
 * to max(|r|, SE); a self-consistency check, common practice, no
 * source), and each kind of window required to occur, so that every
 * path is exercised. */
static void roll_nb_paths(int kind, int align, size_t w) {
  enum { N = 240 };
  double y[N];
  make_series(y, N, 30, 0.0, 2);
  for (size_t t = 0; t < N; t++) {
    double tt = (double)t;
    double g = t < 120 ? 0.02 * tt : 2.4 - 0.025 * (tt - 120.0);
    double u = exp((t < 120 ? 0.6 : 0.45) * sin(12.9898 * tt) * cos(3.7 * tt));
    y[t] = floor(y[t] * exp(g) * u * (t < 120 ? 1.0 : 0.12) + 0.5);
  }
  y[150] = NAN;
  twofold_fit_options *o = opts(TWOFOLD_MODEL_NEGBIN, 1);
  ck_assert_int_eq(twofold_fit_options_set_interval(o, kind), 0);
  double rate[N], lo[N], hi[N];
  int st[N];
  ck_assert_int_eq(twofold_growth_roll(o, y, NULL, N, 2, w, align, rate, lo,
                                       hi, st),
                   0);
  twofold_fit *f;
  ck_assert_int_eq(twofold_fit_new(&f), 0);
  int capped = 0, free_theta = 0, cr_at_ml = 0, cr_below = 0, far = 0;
  int far_to_cap = 0, prev_far = 0;
  for (size_t i = 0; i < N; i++) {
    long s = align == TWOFOLD_ALIGN_TRAILING ? (long)i - (long)w + 1
                                              : (long)i - (long)((w - 1) / 2);
    if (s < 0 || (size_t)s + w > N)
      continue;
    int fwd = 1 + (int)((1 + (size_t)s) % 7);
    int rc = twofold_growth_fit(f, o, y + s, NULL, w, fwd);
    ck_assert_int_eq(rc, st[i]);
    if (rc)
      continue;
    double flo, fhi;
    twofold_fit_interval(f, TWOFOLD_INTERVAL_DEFAULT, &flo, &fhi);
    double r = twofold_fit_rate(f), se = twofold_fit_rate_se(f);
    double tol = 1e-8 * fmax(fabs(r), se);
    ck_assert_msg(fabs(rate[i] - r) <= tol && fabs(lo[i] - flo) <= tol &&
                      fabs(hi[i] - fhi) <= tol,
                  "day %zu kind %d: roll %.15g [%.15g, %.15g] fit %.15g "
                  "[%.15g, %.15g]",
                  i, kind, rate[i], lo[i], hi[i], r, flo, fhi);
    if (twofold_fit_flags(f) & TWOFOLD_FIT_THETA_CAPPED)
      capped++;
    else
      free_theta++;
    double th = twofold_fit_theta(f), ta = twofold_fit_theta_adjusted(f);
    if (ta == th)
      cr_at_ml++;
    else if (ta < th)
      cr_below++;
    if (ta < 1e-3 * th) /* far below the ML value (at its cap) */
      far++;
    if (prev_far && ta == th &&
        (twofold_fit_flags(f) & TWOFOLD_FIT_THETA_CAPPED))
      far_to_cap++;
    prev_far = ta < 1e-3 * th;
  }
  ck_assert_msg(capped > 5 && free_theta > 5,
                "capped %d, free %d windows", capped, free_theta);
  if (kind == TWOFOLD_INTERVAL_DEFAULT)
    ck_assert_msg(cr_at_ml > 2 && cr_below > 5 && far > 5 &&
                      far_to_cap > 0,
                  "adjusted theta at the ML value %d, below %d, far below "
                  "%d, back at the cap after far below %d",
                  cr_at_ml, cr_below, far, far_to_cap);
  twofold_fit_free(f);
  twofold_fit_options_free(o);
}

START_TEST(roll_nb_warm_paths) {
  roll_nb_paths(TWOFOLD_INTERVAL_DEFAULT, TWOFOLD_ALIGN_TRAILING, 21);
  roll_nb_paths(TWOFOLD_INTERVAL_DEFAULT, TWOFOLD_ALIGN_CENTRED, 17);
  roll_nb_paths(TWOFOLD_INTERVAL_WALD, TWOFOLD_ALIGN_TRAILING, 21);
}
END_TEST

START_TEST(roll_arguments) {
  double y[10] = {1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, r[10];
  int st[10];
  ck_assert_int_eq(twofold_growth_roll(NULL, y, NULL, 10, 0, 5, 0, r, NULL,
                                       NULL, st),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_growth_roll(NULL, y, NULL, 10, 1, 0, 0, r, NULL,
                                       NULL, st),
                   TWOFOLD_EINVAL);
  ck_assert_int_eq(twofold_growth_roll(NULL, y, NULL, 10, 1, 5, 2, r, NULL,
                                       NULL, st),
                   TWOFOLD_EINVAL);
  /* window longer than the series: every day ENODATA */
  ck_assert_int_eq(twofold_growth_roll(NULL, y, NULL, 10, 1, 21, 0, r, NULL,
                                       NULL, st),
                   0);
  for (int i = 0; i < 10; i++) {
    ck_assert_int_eq(st[i], TWOFOLD_ENODATA);
    ck_assert(isnan(r[i]));
  }
}
END_TEST

Suite *growth_suite(void);
Suite *growth_suite(void) {
  Suite *s = suite_create("growth");
  TCase *tc = tcase_create("core");
  tcase_set_timeout(tc, 120);
  tcase_add_test(tc, enum_round_trip);
  tcase_add_test(tc, options_defaults_and_validation);
  tcase_add_test(tc, null_safety);
  tcase_add_test(tc, edge_statuses);
  tcase_add_test(tc, large_counts_and_capped_theta);
  tcase_add_test(tc, doubling_mapping);
  tcase_add_test(tc, nine_day_doubling);
  tcase_add_test(tc, roll_equals_fit);
  tcase_add_test(tc, roll_edges_equal_fit);
  tcase_add_test(tc, roll_nb_warm_paths);
  tcase_add_test(tc, roll_arguments);
  suite_add_tcase(s, tc);
  return s;
}

int main(void) {
  SRunner *sr = srunner_create(growth_suite());
  srunner_run_all(sr, CK_NORMAL);
  int failed = srunner_ntests_failed(sr);
  srunner_free(sr);
  return failed ? EXIT_FAILURE : EXIT_SUCCESS;
}
