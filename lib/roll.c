/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * Rolling window fits (twofold_growth_roll).
 *
 * Poisson and quasi-Poisson windows without a general offset and without
 * missing days are fitted from sums: prefix sums taken with stride 7 give,
 * in O(1), the events of each weekday class in the window and sum t*y;
 * the class moments sum e^{r t}{1, t, t^2} are geometric sums in closed
 * form (METHODS.md B2/B3), so a window costs O(iterations x 7), not O(w):
 * the profile log-likelihood in r has only two class lengths, whose power
 * sums share one exponential per evaluation (growth_fit.c, geom_fast);
 * the estimate and the profile-interval ends are found by Halley steps
 * started from the previous day's estimate and interval offsets.
 * The prefix sums hold whole numbers, which doubles add exactly while the
 * totals stay below 2^53; longer or larger series fall back to direct
 * sums.  Windows with missing days keep the same sums (a missing day
 * adds 0); their class power sums skip the missing days, so each class
 * is its own group (one exponential per evaluation still).  Windows with
 * offsets, and NB2 windows, use the general fit (O(w) per iteration).
 * Every window starts from the previous day's estimate, and the interval
 * quantiles are computed once per call.  NB2 (growth_fit.c): beta is
 * first brought to the new days by cheap Newton passes at the previous
 * theta, then the joint Newton (or, theta at its cap, beta at the cap)
 * runs; the Cox-Reid search for the small-sample interval starts at the
 * ML fit (ending there at once when the adjusted score is non-negative)
 * and steps to the previous window's offset of the adjusted theta from
 * the ML one, with the previous secant slope; its stopping rules ask for
 * small steps measured against the error of the adjusted score.
 */
#include "growth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

int twofold_growth_roll(const twofold_fit_options *o, const double *y,
                        const double *offset, size_t n, int first_weekday,
                        size_t w, int align, double *rate, double *rate_lo,
                        double *rate_hi, int *status) {
  twofold_fit_options def;
  if (o == NULL) {
    twofold_fit_options *d;
    if (twofold_fit_options_new(&d) != 0)
      return TWOFOLD_ENOMEM;
    def = *d;
    twofold_fit_options_free(d);
    o = &def;
  }
  if ((y == NULL && n > 0) || first_weekday < 1 || first_weekday > 7 ||
      w == 0 || (align != TWOFOLD_ALIGN_TRAILING &&
                 align != TWOFOLD_ALIGN_CENTRED))
    return TWOFOLD_EINVAL;
  for (size_t i = 0; i < n; i++) {
    if (!tf_count_ok(y[i]))
      return TWOFOLD_ECOUNT;
    if (offset && !tf_isnan(y[i]) && !isfinite(offset[i]))
      return TWOFOLD_EINVAL;
  }
  for (size_t i = 0; i < n; i++) {
    if (rate)
      rate[i] = NAN;
    if (rate_lo)
      rate_lo[i] = NAN;
    if (rate_hi)
      rate_hi[i] = NAN;
    if (status)
      status[i] = TWOFOLD_ENODATA;
  }
  if (n == 0 || w > n)
    return TWOFOLD_OK;

  int kind = o->interval == TWOFOLD_INTERVAL_DEFAULT ? TF_DEFAULT_INTERVAL
                                                     : o->interval;
  unsigned want = kind == TWOFOLD_INTERVAL_WALD      ? TF_WANT_WALD
                  : kind == TWOFOLD_INTERVAL_PROFILE ? TF_WANT_PROFILE
                                                     : TF_WANT_SMALL;
  int wd0 = first_weekday - 1;
  tf_quant Q;
  tf_quant_init(&Q, o->level);

  /* missing-day counts, and stride-7 prefix sums for the fast path */
  size_t *miss = malloc((n + 1) * sizeof *miss);
  if (miss == NULL)
    return TWOFOLD_ENOMEM;
  miss[0] = 0;
  for (size_t i = 0; i < n; i++)
    miss[i + 1] = miss[i] + (tf_isnan(y[i]) ? 1u : 0u);
  double *P0 = NULL, *P1 = NULL;
  int fast = o->model != TWOFOLD_MODEL_NEGBIN && offset == NULL;
  if (fast) {
    P0 = malloc(n * sizeof *P0);
    P1 = malloc(n * sizeof *P1);
    if (P0 == NULL || P1 == NULL) {
      free(miss);
      free(P0);
      free(P1);
      return TWOFOLD_ENOMEM;
    }
    double tot = 0.0;
    for (size_t i = 0; i < n; i++) {
      double v = tf_isnan(y[i]) ? 0.0 : y[i];
      P0[i] = v + (i >= 7 ? P0[i - 7] : 0.0);
      P1[i] = v * (double)i + (i >= 7 ? P1[i - 7] : 0.0);
      tot += v * (double)(i + 1);
    }
    if (!(tot < TF_COUNT_MAX))
      fast = 0; /* sums no longer exact: use direct sums */
  }

  tf_gres *res = malloc(2 * sizeof *res);
  if (res == NULL) {
    free(miss);
    free(P0);
    free(P1);
    return TWOFOLD_ENOMEM;
  }
  tf_gres *cur = &res[0], *prev = &res[1];
  /* only statuses are returned: the windows' messages are not formatted */
  res[0].quiet = res[1].quiet = 1;
  int have_prev = 0;
  double prev_r = 0.0;
  size_t prev_st = 0;
  for (size_t i = 0; i < n; i++) {
    long long s = align == TWOFOLD_ALIGN_TRAILING
                      ? (long long)i - (long long)w + 1
                      : (long long)i - (long long)((w - 1) / 2);
    if (s < 0 || (size_t)s + w > n)
      continue;
    size_t st = (size_t)s;
    int cw = (int)((wd0 + st) % 7);
    int rc;
    if (fast) {
      double Yk[7], T = 0.0;
      for (size_t k = 0; k < 7; k++) {
        if (k >= w) {
          Yk[k] = 0.0;
          continue;
        }
        size_t L = (w - k + 6) / 7;
        size_t last = st + k + 7 * (L - 1);
        size_t first = st + k;
        double a0 = P0[last] - (first >= 7 ? P0[first - 7] : 0.0);
        double a1 = P1[last] - (first >= 7 ? P1[first - 7] : 0.0);
        Yk[k] = a0;
        T += a1 - (double)st * a0;
      }
      double hint[2] = {NAN, NAN};
      if (have_prev) {
        hint[0] = prev->prof[0] - prev->r;
        hint[1] = prev->prof[1] - prev->r;
      }
      rc = tf_growth_geom(o, y + st, w, miss[st + w] - miss[st], cw, Yk, T,
                          want, have_prev ? prev_r : 0.0, hint, &Q, cur);
    } else {
      if (have_prev) {
        /* the previous estimate, moved to this window's day 0 */
        for (int j = 0; j < prev->nclass; j++)
          prev->b[j] += prev->r * (double)(st - prev_st);
        prev_st = st;
      }
      rc = tf_growth_core(o, y + st, offset ? offset + st : NULL, w, cw,
                          want, have_prev ? prev : NULL, &Q, cur);
    }
    if (status)
      status[i] = rc;
    if (rc == 0) {
      if (rate)
        rate[i] = cur->r;
      double lo, hi;
      tf_interval_pick(cur, kind, kind, &lo, &hi);
      if (rate_lo)
        rate_lo[i] = lo;
      if (rate_hi)
        rate_hi[i] = hi;
      tf_gres *tmp = prev;
      prev = cur;
      cur = tmp;
      have_prev = 1;
      prev_r = prev->r;
      prev_st = st;
    }
  }
  free(res);
  free(miss);
  free(P0);
  free(P1);
  return TWOFOLD_OK;
}
