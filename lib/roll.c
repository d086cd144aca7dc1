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
 * Complete 21-day Poisson windows with weekday effects (seven classes of
 * three days) go further (fit_w21 below): the estimate solves a quadratic
 * in e^{7r}, so it costs one square root and one logarithm, and each
 * profile-interval end starts from a fourth-order series inversion of
 * the profile about the estimate, so that one Halley step on the exact
 * equation (one expm1 and one log1p) usually ends it; their class sums
 * are read from the window's 21 days directly, and their edge cases are
 * checked from these sums (w21_status), with the statuses of the general
 * fit.  A window this path cannot finish goes to the general one.
 * The prefix sums hold whole numbers, which doubles add exactly while the
 * totals stay below 2^53; longer or larger series fall back to direct
 * sums.  Windows with missing days keep the same sums (a missing day
 * adds 0); their class power sums skip the missing days, so each class
 * is its own group (one exponential per evaluation still).  Windows with
 * offsets, and NB2 windows, use the general fit (O(w) per iteration).
 * Every window starts from the previous day's estimate, and the interval
 * quantiles are computed once per call.  NB2 (growth_fit.c): beta is
 * first brought to the new days by cheap Newton passes at the previous
 * theta, then the joint Newton (or, theta at its cap, beta at the cap,
 * where a series of the theta score in 1/theta settles most windows
 * without a logarithm per day) runs; a joint fit that runs into the flat
 * tail (foreseen by a Newton step in 1/theta) tries the cap before the
 * alternation, and one that meets a likelihood not concave in log theta
 * takes a few unit steps up its slope first.  The Cox-Reid search for
 * the small-sample interval starts next to the ML fit, at the joint
 * fit's last pass (ending at the ML fit when the adjusted score is
 * non-negative there), and steps to the previous window's offset of the
 * adjusted theta from the ML one, or starts at that guess when it lies
 * far below, with the previous secant slope; its stopping rules ask for
 * small steps measured against the error of the adjusted score; steps
 * that a secant step in 1/theta sends into the flat tail (theta above
 * 1e4) end it, a far start then decided by the adjusted score at the ML
 * fit.  When it falls back to the bracketing search, the bracket found
 * is refined by the same secant passes before false position.
 */
#include "growth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* ------------------------------------------------------------------ */
/* Complete 21-day Poisson windows with weekday effects                */
/* ------------------------------------------------------------------ */

/* A complete 21-day window with weekday effects, yw its first day:
 * class k holds days k, k + 7, k + 14.  Sets the total events *Y and K =
 * sum_k (y_{k+7} + 2 y_{k+14}) and returns the window's status, with the
 * edge cases in the order of checks() in growth_fit.c (a weekday absent
 * and too few days cannot happen here): all counts zero, fewer events
 * than the minimum, a class without events, events only on the last
 * (first) day of every class. */
static int w21_status(const twofold_fit_options *o, const double *yw,
                      double *Y, double *K) {
  double Yk[7], tY = 0.0, tK = 0.0;
  int up = 1, down = 1, empty = 0;
  for (int k = 0; k < 7; k++) {
    double a = yw[k], b = yw[k + 7], c = yw[k + 14];
    Yk[k] = a + b + c;
    tY += Yk[k];
    tK += b + 2.0 * c;
    empty |= Yk[k] == 0.0;
    up &= c == Yk[k];
    down &= a == Yk[k];
  }
  *Y = tY;
  *K = tK;
  if (tY == 0.0)
    return TWOFOLD_EZERO;
  if (tY < o->min_events)
    return TWOFOLD_EFEWEVENTS;
  return empty || up || down ? TWOFOLD_ESEPARATION : 0;
}

/* With seven classes of three days, in x = 7 r the profile
 * log-likelihood is l(x) = K x - Y G(x), G(x) = log(1 + e^x + e^{2x}),
 * Y the window's events and K = sum_k (y_{k+7} + 2 y_{k+14}), both whole
 * numbers (added exactly, as the prefix sums).  With D = K - Y the score
 * K - Y G'(x) = 0 is the quadratic (Y - D) q^2 - D q - (Y + D) = 0 in
 * q = e^x, whose positive root is q = 2K / (S - D) (D < 0) or 1/q =
 * 2(2Y - K) / (D + S) (D >= 0), S = sqrt(4 Y^2 - 3 D^2), written so that
 * nothing cancels; 0 < K < 2Y once the separation checks have passed.
 * The variance of k there, S K (2Y - K) / (Y^2 (Y + S)), gives the
 * standard error without waiting for q.
 *
 * The profile-interval ends solve l(xhat) - l(xhat + d) = cc.  Each
 * starts from the series inversion described in fit_w21; Halley steps on
 * the exact equation then stop, as gp_root in growth_fit.c, once a step
 * is below 1e-5 of the Wald half-width, which leaves an error of the
 * order of the cube of that step (for the benchmark districts one exact
 * step per end, as the start is already that close).  Each exact step
 * costs one expm1 and one log1p: G(xhat + d) - G(xhat) = log1p(e (p1 +
 * p2 (e + 2))), e = expm1(d), p_k the probabilities of k at the
 * estimate. */
typedef struct {
  double Y, K, p0, p1, p2;
} w21_t;

/* The interval ends as offsets d[0] < 0 < d[1] in x, from the starts in
 * d; both sides step together (their chains of dependent operations then
 * overlap).  With v = e^d the weights of k are p_k v^k, W their sum, so
 * W l'(d) = g = K W - Y (w1 + 2 w2) and W^2 l''(d) = -Y N, N = p0 w1 +
 * 4 p0 w2 + w1 w2: one division per step.  Returns 0, or -1 on
 * failure. */
static int w21_ends(const w21_t *p, double cc, double *d, double scale) {
  int todo[2] = {1, 1};
  for (int it = 0; it < 60; it++) {
    for (int s = 0; s < 2; s++) {
      if (!todo[s])
        continue;
      double sd = s ? 1.0 : -1.0, x = d[s];
      double e = expm1(x);
      double f = p->K * x - p->Y * log1p(e * (p->p1 + p->p2 * (e + 2.0))) +
                 cc;
      double v = 1.0 + e, w1 = p->p1 * v, w2 = p->p2 * v * v;
      double W = p->p0 + w1 + w2;
      double g = p->K * W - p->Y * (w1 + 2.0 * w2);
      double N = p->Y * (p->p0 * (w1 + 4.0 * w2) + w1 * w2);
      if (!(sd * g < 0.0) || !isfinite(f) || !isfinite(N))
        return -1;
      /* Halley, dx = -2 f l' / (2 l'^2 - f l''), or Newton, dx = -f /
       * l', where Halley's step would be more than twice Newton's */
      double den = 2.0 * g * g + f * N;
      double dx = den >= g * g ? -2.0 * f * g * W / den : -f * W / g;
      if (sd * (x + dx) <= 0.0)
        dx = -0.5 * x; /* stay on this side */
      d[s] = x + dx;
      if (fabs(dx) < 1e-5 * scale)
        todo[s] = 0;
    }
    if (!todo[0] && !todo[1])
      return 0;
  }
  return -1;
}

/* The Poisson fit of a complete 21-day window with weekday effects that
 * passed w21_status (Y, K from it): the estimate in *r and the interval
 * (profile if prof, else Wald) in *lo, *hi.  hint: the previous window's
 * interval offsets (NULL or NaN if none), the start should the series
 * one fail.  Returns 0, or 1 when the general path should fit the
 * window.
 *
 * At the estimate the probabilities of k = 0, 1, 2 are, with J = 2Y - K,
 * p0 = J (S - D) / Z, p1 = 2 K J / Z, p2 = K (S + D) / Z, Z = 2Y (Y + S),
 * and (S - D)(S + D) = 4 K J gives whichever of S -+ D would cancel; q =
 * p2 / p1 = p1 / p0, and the variance of k is p1 S / Y. */
static int fit_w21(double Y, double K, const tf_quant *Q, int prof,
                   const double *hint, double *r, double *lo, double *hi) {
  double D = K - Y, J = Y - D;
  double S = sqrt(4.0 * Y * Y - 3.0 * D * D);
  double iZ = 1.0 / (2.0 * Y * (Y + S));
  double p1 = 2.0 * K * J * iZ;
  double h = 49.0 * p1 * S; /* 49 Y V */
  double A = S + fabs(D);  /* S + D or S - D, whichever has no cancellation */
  double q = D >= 0.0 ? A / (2.0 * J) : 2.0 * K / A;
  double x = log(q);
  if (!isfinite(x) || !(h > 0.0) || !isfinite(h))
    return 1;
  double rh = x / 7.0, se = 1.0 / sqrt(h), st = Q->z * se;
  *r = rh;
  if (!prof) {
    *lo = rh - st;
    *hi = rh + st;
    return 0;
  }
  double B = 4.0 * K * J / A; /* the other of S -+ D */
  double smd = D >= 0.0 ? B : A, spd = D >= 0.0 ? A : B;
  w21_t p = {Y, K, J * smd * iZ, p1, K * spd * iZ};
  /* the start: with G(xhat + d) - G(xhat) = m d + sum_{n>=2} k_n d^n /
   * n!, k_n the cumulants of k at the estimate, the end solves
   * d sqrt(1 + b1 d + b2 d^2 + b3 d^3 + ...) = +-u, u = sqrt(2 cc / (Y
   * k_2)) = 7 z se (the Wald half-width in x), b1 = k_3 / (3 k_2),
   * b2 = k_4 / (12 k_2), b3 = k_5 / (60 k_2), inverted as a power series
   * in u to the fourth order.  The cumulants come from the moments of
   * k - 1, whose odd ones are all m1 = p2 - p0 and even ones m2 = p2 +
   * p0. */
  double m1 = p.p2 - p.p0, m2 = p.p2 + p.p0, m1s = m1 * m1;
  double k3 = m1 * (1.0 - 3.0 * m2 + 2.0 * m1s);
  double k4 = m2 - 4.0 * m1s - 3.0 * m2 * m2 + 12.0 * m2 * m1s -
              6.0 * m1s * m1s;
  double k5 = m1 * (1.0 - 15.0 * m2 + 20.0 * m1s + 30.0 * m2 * m2 -
                    60.0 * m2 * m1s + 24.0 * m1s * m1s);
  double iv = 49.0 * Y * se * se; /* 1 / k_2 */
  double b1 = k3 * iv * (1.0 / 3.0), b2 = k4 * iv * (1.0 / 12.0);
  double b3 = k5 * iv * (1.0 / 60.0);
  double be1 = 0.5 * b1, be2 = 0.5 * b2 - 0.125 * b1 * b1;
  double be3 = 0.5 * b3 - 0.25 * b1 * b2 + 0.0625 * b1 * b1 * b1;
  double c2 = -be1, c3 = 2.0 * be1 * be1 - be2;
  double c4 = -5.0 * be1 * be1 * be1 + 5.0 * be1 * be2 - be3;
  double u = 7.0 * st;
  double sc = u + 1e-300;
  double h0 = -u * (1.0 - u * (c2 - u * (c3 - u * c4)));
  double h1 = u * (1.0 + u * (c2 + u * (c3 + u * c4)));
  if (!(h0 < 0.0 && h0 > -2.0 * u && h1 > 0.0 && h1 < 2.0 * u)) {
    /* the previous window's offsets, or the Wald ends */
    h0 = -u;
    h1 = u;
    if (hint && hint[0] < 0.0 && hint[1] > 0.0) {
      h0 = 7.0 * hint[0];
      h1 = 7.0 * hint[1];
    }
  }
  double d[2] = {h0, h1};
  if (w21_ends(&p, Q->c, d, sc) != 0)
    return 1;
  *lo = rh + d[0] / 7.0;
  *hi = rh + d[1] / 7.0;
  return 0;
}

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
  double prev_r = 0.0, prev_off[2] = {NAN, NAN};
  size_t prev_st = 0;
  int need_prof = kind != TWOFOLD_INTERVAL_WALD;
  /* the closed-form 21-day path; with fewer iterations allowed than by
   * default, the general path decides whether a window's fit converges */
  int lean = fast && o->model == TWOFOLD_MODEL_POISSON && o->weekday &&
             w == 21 && o->max_iter >= 50;
  for (size_t i = 0; i < n; i++) {
    long long s = align == TWOFOLD_ALIGN_TRAILING
                      ? (long long)i - (long long)w + 1
                      : (long long)i - (long long)((w - 1) / 2);
    if (s < 0 || (size_t)s + w > n)
      continue;
    size_t st = (size_t)s;
    int cw = (int)((wd0 + st) % 7);
    int rc;
    if (lean && miss[st + w] == miss[st]) {
      double Y, K, r, lo, hi;
      rc = w21_status(o, y + st, &Y, &K);
      if (rc == 0 && fit_w21(Y, K, &Q, need_prof, have_prev ? prev_off : NULL,
                             &r, &lo, &hi) != 0)
        rc = 1; /* the general path */
      if (rc <= 0) {
        if (status)
          status[i] = rc;
        if (rc == 0) {
          if (rate)
            rate[i] = r;
          if (rate_lo)
            rate_lo[i] = lo;
          if (rate_hi)
            rate_hi[i] = hi;
          have_prev = 1;
          prev_r = r;
          prev_off[0] = need_prof ? lo - r : NAN;
          prev_off[1] = need_prof ? hi - r : NAN;
        }
        continue;
      }
    }
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
        hint[0] = prev_off[0];
        hint[1] = prev_off[1];
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
      prev_off[0] = prev->prof[0] - prev->r;
      prev_off[1] = prev->prof[1] - prev->r;
      prev_st = st;
    }
  }
  free(res);
  free(miss);
  free(P0);
  free(P1);
  return TWOFOLD_OK;
}
