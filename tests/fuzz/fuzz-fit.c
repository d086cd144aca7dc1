/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Fuzz harness for the growth fits: twofold_growth_fit and
 * twofold_growth_roll on series and options decoded from the bytes.
 *
 * Layout of the input (missing bytes read as zero):
 *   model, level, weekday flag, interval kind, minimum events, maximum
 *   iterations, tolerance: one byte each, mapped through tables that
 *   include invalid values (the setters must refuse those or accept them
 *   without harm);
 *   first weekday (0..8: 0 and 8 are invalid), window (2 bytes), alignment
 *   (0..2: 2 is invalid), offset flag, length (2 bytes, at most 2000);
 *   then one tag byte per day (NaN, zero, small, large, 2^53, above 2^53,
 *   infinite, negative, fractional, raw 8-byte doubles, ...), and one tag
 *   byte per day for the offsets if the flag is set.
 * Besides the sanitizers it checks the header's promises: the status is
 * kept in the fit with a message, rolling outputs are NaN where the status
 * is not 0, doubling times are never negative or NaN, and the same input
 * gives the same output bit for bit. */
#include "fuzz.h"
#include "twofold.h"

#include <math.h>
#include <string.h>

#define MAX_DAYS 2000

static const double levels[] = {0.95, 0.9, 0.5, 0.99, 0.999999, 1e-9, 0.0,
                                1.0, NAN, -0.5, 2.0, INFINITY, 0.8, 0.6};
static const double min_events[] = {20, 0, 1, 5, 1e6, NAN, -5, INFINITY,
                                    1e300, 0.5};
static const int iterations[] = {50, 1, 2, 0, -1, 200, 5, 3, 1000, 10};
static const double tolerances[] = {1e-10, 1e-6, 0.0, NAN, 1.0, 1e-300,
                                    -1.0, INFINITY, 1e-15, 1e-3};

#define PICK(tab, b) (tab[(b) % (sizeof tab / sizeof tab[0])])

static double count_value(fuzz_bytes *b, double prev) {
  uint8_t tag = fuzz_u8(b);
  switch (tag & 15) {
  case 0: return NAN;
  case 1: return 0.0;
  case 2: return (double)fuzz_u16(b);
  case 3: return (double)fuzz_u32(b);
  case 4: return 9007199254740992.0;          /* 2^53: the largest count */
  case 5: return 9007199254740994.0;          /* 2^53 + 2: too large     */
  case 6: return INFINITY;
  case 7: return -1.0;
  case 8: return 1.5;
  case 9: return -0.0;
  case 10: return prev;                       /* constant runs           */
  case 11: {                                  /* any double at all       */
    uint64_t u = fuzz_u64(b);
    double v;
    memcpy(&v, &u, sizeof v);
    return v;
  }
  case 12: return 1e15 + (double)fuzz_u8(b);
  case 13: return -INFINITY;
  default: return (double)(tag >> 4) + (double)fuzz_u8(b); /* small */
  }
}

static double offset_value(fuzz_bytes *b) {
  uint8_t tag = fuzz_u8(b);
  switch (tag & 7) {
  case 0: return 0.0;
  case 1: return log(1e5);
  case 2: return NAN;
  case 3: return INFINITY;
  case 4: return 700.0;
  case 5: return -700.0;
  case 6: {
    uint64_t u = fuzz_u64(b);
    double v;
    memcpy(&v, &u, sizeof v);
    return v;
  }
  default: return (double)(int8_t)fuzz_u8(b) / 16.0;
  }
}

static int same_double(double a, double b) {
  return memcmp(&a, &b, sizeof a) == 0 || (isnan(a) && isnan(b));
}

static void check_doubling(double r, double lo, double hi) {
  if (isnan(r) || isnan(lo) || isnan(hi))
    return;
  double t = -1, tlo = -1, thi = -1;
  int sense = 9;
  if (twofold_doubling_time(r, lo, hi, &t, &tlo, &thi, &sense) == 0) {
    FUZZ_CHECK(!isnan(t) && t >= 0);
    FUZZ_CHECK(!isnan(tlo) && tlo >= 0);
    FUZZ_CHECK(!isnan(thi) && thi >= 0);
    FUZZ_CHECK(sense == 1 || sense == -1 || sense == 0);
    FUZZ_CHECK(sense == (r > 0) - (r < 0));
  }
  FUZZ_CHECK(twofold_doubling_time(r, lo, hi, NULL, NULL, NULL, NULL) <= 0);
}

/* Read every getter of a fit; the promises of a successful one. */
static void check_fit(const twofold_fit *fit, int rc, size_t n) {
  FUZZ_CHECK(rc <= 0 && rc > TWOFOLD_E_LAST_);
  FUZZ_CHECK(twofold_fit_status(fit) == rc);
  const char *msg = twofold_fit_errmsg(fit);
  FUZZ_CHECK(msg != NULL);
  FUZZ_CHECK(rc == 0 ? msg[0] == '\0' : msg[0] != '\0');
  double r = twofold_fit_rate(fit);
  (void)twofold_fit_rate_se(fit);
  (void)twofold_fit_level(fit);
  (void)twofold_fit_intercept(fit);
  for (int d = 0; d <= 8; d++)
    (void)twofold_fit_weekday_effect(fit, d);
  (void)twofold_fit_theta(fit);
  (void)twofold_fit_dispersion(fit);
  (void)twofold_fit_loglik(fit);
  (void)twofold_fit_deviance(fit);
  (void)twofold_fit_iterations(fit);
  (void)twofold_fit_events(fit);
  (void)twofold_fit_df_residual(fit);
  (void)twofold_fit_model(fit);
  (void)twofold_fit_flags(fit);
  size_t used = twofold_fit_days_used(fit);
  size_t missing = twofold_fit_days_missing(fit);
  for (int kind = 0; kind <= 4; kind++) {
    double lo = NAN, hi = NAN;
    int irc = twofold_fit_interval(fit, kind, &lo, &hi);
    FUZZ_CHECK(irc <= 0);
    if (rc == 0 && irc == 0) {
      FUZZ_CHECK(!(lo > hi));
      check_doubling(r, lo, hi);
    }
  }
  if (rc == 0) {
    FUZZ_CHECK(!isnan(r));
    FUZZ_CHECK(used + missing <= n);
    FUZZ_CHECK(used > 0);
  }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  fuzz_bytes b = {data, size};
  twofold_fit_options *o = NULL;
  if (twofold_fit_options_new(&o) != 0)
    return 0;
  int model = fuzz_u8(&b) % 4;
  int mrc = twofold_fit_options_set_model(o, model);
  FUZZ_CHECK(model < 3 ? mrc == 0 : mrc == TWOFOLD_EINVAL);
  double level = PICK(levels, fuzz_u8(&b));
  int lrc = twofold_fit_options_set_level(o, level);
  FUZZ_CHECK((level > 0 && level < 1) ? lrc == 0 : lrc < 0);
  (void)twofold_fit_options_set_weekday(o, fuzz_u8(&b) % 3);
  int kind = fuzz_u8(&b) % 5;
  int krc = twofold_fit_options_set_interval(o, kind);
  FUZZ_CHECK(kind < 4 ? krc == 0 : krc == TWOFOLD_EINVAL);
  (void)twofold_fit_options_set_min_events(o, PICK(min_events, fuzz_u8(&b)));
  (void)twofold_fit_options_set_max_iterations(o,
                                               PICK(iterations, fuzz_u8(&b)));
  (void)twofold_fit_options_set_tolerance(o, PICK(tolerances, fuzz_u8(&b)));
  int first_weekday = fuzz_u8(&b) % 9;
  size_t w = fuzz_u16(&b) % 512;
  int align = fuzz_u8(&b) % 3;
  int with_offset = fuzz_u8(&b) & 1;
  size_t n = fuzz_u16(&b) % (MAX_DAYS + 1);

  double *y = malloc((n ? n : 1) * sizeof *y);
  double *off = malloc((n ? n : 1) * sizeof *off);
  double *rate = malloc((n ? n : 1) * sizeof *rate);
  double *lo = malloc((n ? n : 1) * sizeof *lo);
  double *hi = malloc((n ? n : 1) * sizeof *hi);
  int *st = malloc((n ? n : 1) * sizeof *st);
  double *rate2 = malloc((n ? n : 1) * sizeof *rate2);
  twofold_fit *fit = NULL, *fit2 = NULL;
  if (!y || !off || !rate || !lo || !hi || !st || !rate2 ||
      twofold_fit_new(&fit) != 0 || twofold_fit_new(&fit2) != 0)
    goto done;
  double prev = 0;
  for (size_t i = 0; i < n; i++)
    prev = y[i] = count_value(&b, prev);
  for (size_t i = 0; i < n; i++)
    off[i] = with_offset ? offset_value(&b) : 0.0;
  const double *offp = with_offset ? off : NULL;

  /* One window: the whole series. */
  int rc = twofold_growth_fit(fit, o, n ? y : NULL, offp, n, first_weekday);
  if (first_weekday < 1 || first_weekday > 7)
    FUZZ_CHECK(rc != 0);
  check_fit(fit, rc, n);
  /* The same input again, into a fresh fit and into the used one. */
  int rc2 = twofold_growth_fit(fit2, o, n ? y : NULL, offp, n, first_weekday);
  FUZZ_CHECK(rc2 == rc);
  FUZZ_CHECK(same_double(twofold_fit_rate(fit), twofold_fit_rate(fit2)));
  FUZZ_CHECK(same_double(twofold_fit_rate_se(fit), twofold_fit_rate_se(fit2)));
  FUZZ_CHECK(same_double(twofold_fit_theta(fit), twofold_fit_theta(fit2)));
  /* A shorter window through the reused fit. */
  if (n > 1) {
    rc2 = twofold_growth_fit(fit, o, y + 1, offp ? offp + 1 : NULL, n - 1,
                             first_weekday % 7 + 1);
    check_fit(fit, rc2, n - 1);
  }

  /* Rolling fits, at most a few hundred windows per input. */
  if (n <= 300) {
    int rrc = twofold_growth_roll(o, n ? y : NULL, offp, n, first_weekday, w,
                                  align, rate, lo, hi, st);
    FUZZ_CHECK(rrc <= 0 && rrc > TWOFOLD_E_LAST_);
    if (rrc == 0) {
      for (size_t i = 0; i < n; i++) {
        FUZZ_CHECK(st[i] <= 0 && st[i] > TWOFOLD_E_LAST_);
        if (st[i] != 0)
          FUZZ_CHECK(isnan(rate[i]) && isnan(lo[i]) && isnan(hi[i]));
        else
          FUZZ_CHECK(!(lo[i] > hi[i]));
        if (w > n) /* no window fits */
          FUZZ_CHECK(isnan(rate[i]));
      }
      /* Only some outputs, and the same numbers again. */
      int rrc2 = twofold_growth_roll(o, n ? y : NULL, offp, n, first_weekday,
                                     w, align, rate2, NULL, NULL, NULL);
      FUZZ_CHECK(rrc2 == 0);
      for (size_t i = 0; i < n; i++)
        FUZZ_CHECK(same_double(rate[i], rate2[i]));
    }
  }

done:
  twofold_fit_free(fit);
  twofold_fit_free(fit2);
  free(y);
  free(off);
  free(rate);
  free(lo);
  free(hi);
  free(st);
  free(rate2);
  twofold_fit_options_free(o);
  return 0;
}
