/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * The numerical core of the growth module: maximum-likelihood fits of
 *     log mu_t = a + r*t [+ w_weekday(t)] [+ offset_t]
 * on one window, Poisson (and quasi-Poisson) or negative binomial NB2,
 * with Wald, profile-likelihood and small-sample intervals for r.
 *
 * Parametrisation.  Internally the model carries one log-level b_j per
 * weekday class j (seven classes, or one when weekday effects are off);
 * a = mean_j b_j and w_j = b_j - a give the public intercept and the
 * sum-to-zero weekday effects.  The two parametrisations span the same
 * linear predictor, so r, its standard error, the likelihood and every
 * interval are the same.
 *
 * Poisson.  Given r, the b_j have closed-form maximisers
 * b_j(r) = log Y_j - log E0_j(r), E0_j(r) = sum_{t in j} e^{o_t + r t},
 * which leaves the concave one-dimensional profile log-likelihood
 *     l_p(r) = r T - sum_j Y_j log E0_j(r) + const,    T = sum_t t y_t,
 * with l_p'(r) = T - sum_j Y_j m_j(r) and l_p''(r) = -sum_j Y_j V_j(r),
 * m_j and V_j the mean and variance of t under the weights e^{o_t + r t}
 * of class j.  The maximum likelihood estimate solves l_p'(r) = 0 (Newton
 * safeguarded by bisection) and 1 / -l_p''(r_hat) is exactly the (r, r)
 * element of the inverse Fisher information of the full model (Schur
 * complement), so SE(r) = (sum_j Y_j V_j)^{-1/2}.  Without offsets and
 * missing days E0_j, m_j, V_j are geometric sums in closed form
 * (METHODS.md B2/B3), which lib/roll.c uses to fit a window in O(1).
 *
 * Separation.  l_p'(r) is decreasing from sum_j Y_j (T_j/Y_j - tmax_j)
 * to ...; the MLE is infinite exactly when, in every weekday class, all
 * events fall on the class's last present day (r -> +inf: zeros, then
 * positive counts only on the last day of each class) or all on its first
 * (r -> -inf), or when a class has no events at all (its b_j -> -inf).
 * These are tested exactly before fitting (TWOFOLD_ESEPARATION).  The
 * same condition governs NB2 with a log link (the likelihood at fixed
 * theta is unbounded in the same directions).
 *
 * NB2.  Alternate, as MASS::glm.nb does (Venables & Ripley 2002, Modern
 * Applied Statistics with S, 4th ed., Springer, section 7.4): Newton on
 * (r, b) at fixed theta (observed information; the arrow-shaped Hessian
 * is solved in O(classes)), then Newton on log theta at fixed mu (the
 * score and information of MASS's theta.ml), until both are stationary.
 * theta is capped at TF_THETA_CAP (TWOFOLD_FIT_THETA_CAPPED).  The
 * alternation's result is then polished, and a window started from the
 * previous day's estimate (rolling fits) is fitted, by Newton's method
 * on all parameters jointly (nb_joint), which falls back to the
 * alternation whenever it cannot proceed safely (or, rolling, ends in
 * the flat tail above theta 1e5).  A rolling window first takes one
 * Newton step on beta alone at the previous theta (nb_beta_pre: a pass
 * without a logarithm per day), which moves the levels of the days that
 * changed (up to three from a capped theta).  The
 * standard error of r uses the expected information (X'WX)^{-1},
 * W = mu / (1 + mu/theta), at the estimates, as glm.nb and statsmodels'
 * GLM do (beta and theta are orthogonal in expectation: Lawless 1987,
 * Can J Stat 15:209-225).
 *
 * Every NB2 pass over the window's days is one kernel (nb_kernel), whose
 * flags pick the sums a caller needs; it forms a class's means from one
 * exponential and the theta score of a day from one logarithm (the
 * psi(x) - log x series for x >= 10; A&S 6.3.18).
 */
#include "growth_internal.h"

#include <float.h>
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_sf_gamma.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#ifdef __SSE2__
#include <emmintrin.h>
#endif

/* ------------------------------------------------------------------ */
/* Small helpers                                                       */
/* ------------------------------------------------------------------ */

/* Neumaier's compensated summation (Neumaier 1974, ZAMM 54:39-51). */
typedef struct {
  double s, c;
} ksum;

static inline void ks_add(ksum *k, double v) {
  double t = k->s + v;
  if (fabs(k->s) >= fabs(v))
    k->c += (k->s - t) + v;
  else
    k->c += (v - t) + k->s;
  k->s = t;
}
static inline double ks_val(const ksum *k) { return k->s + k->c; }

double tf_norm_q(double p) {
  if (!(p > 0.0 && p < 1.0))
    return NAN;
  return gsl_cdf_ugaussian_Pinv(p);
}

/* Upper quantiles from the upper tail probability q = (1 - level) / 2,
 * which is exact for every level in (0, 1) (1 - level is), where
 * 0.5 + level / 2 rounds to 1 for levels within 1e-16 of 1.  The
 * Student t with one degree of freedom is the Cauchy, whose quantile
 * cot(pi q) GSL's tan-based form loses for q below 1e-16. */
static double upper_q(double level, double df) {
  if (!(level > 0.0 && level < 1.0))
    return NAN;
  double q = 0.5 * (1.0 - level);
  if (!(q > 0.0))
    return NAN;
  if (!isfinite(df))
    return gsl_cdf_ugaussian_Qinv(q);
  if (df == 1.0)
    return 1.0 / tan(3.14159265358979323846 * q);
  return gsl_cdf_tdist_Qinv(q, df);
}

double tf_z_level(double level) { return upper_q(level, INFINITY); }

double tf_t_level(double level, double df) {
  if (!(df > 0.0) || !isfinite(df))
    return NAN;
  return upper_q(level, df);
}

/* The chi-square(1) quantile at level is the square of the normal
 * quantile at (1 + level) / 2 (gsl_cdf_chisq_Pinv fails at extreme
 * levels such as 1e-300). */
double tf_chisq1_q(double level) {
  double z = tf_z_level(level);
  return z * z;
}

void tf_quant_init(tf_quant *Q, double level) {
  Q->level = level;
  Q->z = tf_z_level(level);
  Q->c = 0.5 * tf_chisq1_q(level);
  Q->df = NAN;
  Q->tq = NAN;
}

double tf_quant_t(tf_quant *Q, double df) {
  if (df != Q->df) {
    Q->df = df;
    Q->tq = tf_t_level(Q->level, df);
  }
  return Q->tq;
}

/* log Gamma(y + 1) for a whole number y >= 0. */
static double lfact(double y) { return gsl_sf_lngamma(y + 1.0); }

/* log Gamma(theta + y) - log Gamma(theta), theta > 0, y >= 0 whole. */
static double lnpoch(double theta, double y) {
  if (y == 0.0)
    return 0.0;
  if (y <= 8.0) {
    double s = 0.0;
    for (double k = 0.0; k < y; k += 1.0)
      s += log(theta + k);
    return s;
  }
  return gsl_sf_lnpoch(theta, y);
}

/* psi(theta + y) - psi(theta) and (d2 not NULL) psi'(theta) -
 * psi'(theta + y); ps0 and ps1 are psi(theta) and psi'(theta) (used only
 * where needed). */
static void psidiff(double theta, double y, double ps0, double ps1,
                    double *d1, double *d2) {
  if (y <= 6.0) {
    double s1 = 0.0, s2 = 0.0;
    for (double k = 0.0; k < y; k += 1.0) {
      double u = 1.0 / (theta + k);
      s1 += u;
      s2 += u * u;
    }
    *d1 = s1;
    if (d2)
      *d2 = s2;
    return;
  }
  if (theta >= 1e3) {
    /* differences of the asymptotic series (Abramowitz & Stegun 1964,
     * 6.3.18 and 6.4.12), formed without cancellation: the direct
     * difference of psi values loses the O(1/theta^2) signal the score
     * needs at large theta */
    double x = theta, xy = theta + y;
    double i1 = y / (x * xy);                            /* 1/x - 1/xy     */
    double i2 = y * (x + xy) / (x * x * xy * xy);        /* 1/x^2 - 1/xy^2 */
    double i3 = i1 * (1.0 / (x * x) + 1.0 / (x * xy) + 1.0 / (xy * xy));
    double x2 = x * x, xy2 = xy * xy;
    double i4 = i2 * (1.0 / x2 + 1.0 / xy2);
    double i5 = 1.0 / (x2 * x2 * x) - 1.0 / (xy2 * xy2 * xy);
    double i6 = 1.0 / (x2 * x2 * x2) - 1.0 / (xy2 * xy2 * xy2);
    double i7 = 1.0 / (x2 * x2 * x2 * x) - 1.0 / (xy2 * xy2 * xy2 * xy);
    *d1 = log1p(y / x) + i1 / 2.0 + i2 / 12.0 - i4 / 120.0 + i6 / 252.0;
    if (d2)
      *d2 = i1 + i2 / 2.0 + i3 / 6.0 - i5 / 30.0 + i7 / 42.0;
    return;
  }
  *d1 = tf_digamma(theta + y) - ps0;
  if (d2)
    *d2 = ps1 - tf_trigamma(theta + y);
}

/* Closed-form moments of k = 0..L-1 under weights e^{b k} (METHODS.md B2):
 * log of the sum, mean and variance.  expm1 keeps digits near b = 0 and a
 * series is used for |b| L < 0.05, where the closed forms cancel. */
void tf_geom(double b, double L, double *logE0, double *m, double *v) {
  if (L <= 1.0) {
    *logE0 = 0.0;
    *m = 0.0;
    *v = 0.0;
    return;
  }
  double bL = b * L;
  if (fabs(bL) < 0.05) {
    double L2 = L * L, L4 = L2 * L2, L6 = L4 * L2;
    double b2 = b * b;
    *m = (L - 1.0) / 2.0 + b * (L2 - 1.0) / 12.0 -
         b * b2 * (L4 - 1.0) / 720.0 + b * b2 * b2 * (L6 - 1.0) / 30240.0;
    *v = (L2 - 1.0) / 12.0 - b2 * (L4 - 1.0) / 240.0 +
         b2 * b2 * (L6 - 1.0) / 6048.0;
    /* cumulant generating function of the uniform on 0..L-1 */
    *logE0 = log(L) + b * (L - 1.0) / 2.0 + b2 * (L2 - 1.0) / 24.0 -
             b2 * b2 * (L4 - 1.0) / 2880.0 + b2 * b2 * b2 * (L6 - 1.0) / 181440.0;
    return;
  }
  double ab = fabs(b);
  double eL = -expm1(-ab * L); /* 1 - e^{-|b| L} */
  double e1 = -expm1(-ab);     /* 1 - e^{-|b|}   */
  double mpos = L / eL - 1.0 / e1; /* mean for +|b| */
  if (b > 0.0) {
    *logE0 = b * (L - 1.0) + log(eL) - log(e1);
    *m = mpos;
  } else {
    *logE0 = log(eL) - log(e1);
    *m = (L - 1.0) - mpos;
  }
  double s1 = sinh(ab / 2.0), sL = sinh(ab * L / 2.0);
  double vv = 1.0 / (4.0 * s1 * s1) - (L * L) / (4.0 * sL * sL);
  *v = vv > 0.0 ? vv : 0.0;
}

/* ------------------------------------------------------------------ */
/* The window                                                          */
/* ------------------------------------------------------------------ */

typedef struct {
  size_t n;
  const double *y;
  const double *off;
  int wd0;
  int nc;
  size_t used;
  double Y[7];     /* events per class */
  double Ytot, T;  /* total events, sum t*y */
  double yo;       /* sum y*o */
  long tfirst[7], tlast[7];
  double yfirst[7], ylast[7];
  size_t cnt[7];
  /* geometry mode (lib/roll.c): complete window, no offset; class j has
   * days u0[j] + 7k, k = 0..L[j]-1.  The window pointer y is then unused
   * by the Poisson path. */
  int geom;
  double u0[7], L[7];
} win_t;

static inline int cls(const win_t *w, size_t t) {
  return w->nc == 7 ? (int)((w->wd0 + t) % 7) : 0;
}

/* The first day of weekday class j (0..6) with weekday effects (w->wd0
 * in 0..6: no division). */
static inline size_t cls_first(const win_t *w, int j) {
  return (size_t)(j >= w->wd0 ? j - w->wd0 : j - w->wd0 + 7);
}

static inline double offv(const win_t *w, size_t t) {
  return w->off ? w->off[t] : 0.0;
}

/* Poisson class moments at r. */
static void pois_moments(const win_t *w, double r, double *logE0, double *m,
                         double *V) {
  int nc = w->nc;
  if (w->geom) {
    /* at most two distinct class lengths */
    double Lc[2] = {-1, -1}, lg[2] = {0, 0}, mg[2] = {0, 0}, vg[2] = {0, 0};
    double step = nc == 7 ? 7.0 : 1.0;
    for (int j = 0; j < nc; j++) {
      int s = (Lc[0] == w->L[j]) ? 0 : (Lc[1] == w->L[j]) ? 1 : -1;
      if (s < 0) {
        s = Lc[0] < 0 ? 0 : 1;
        Lc[s] = w->L[j];
        tf_geom(step * r, w->L[j], &lg[s], &mg[s], &vg[s]);
      }
      logE0[j] = r * w->u0[j] + lg[s];
      m[j] = w->u0[j] + step * mg[s];
      V[j] = step * step * vg[s];
    }
    return;
  }
  double mx[7];
  for (int j = 0; j < nc; j++)
    mx[j] = -INFINITY;
  for (size_t t = 0; t < w->n; t++) {
    if (tf_isnan(w->y[t]))
      continue;
    int j = cls(w, t);
    double e = offv(w, t) + r * (double)t;
    if (e > mx[j])
      mx[j] = e;
  }
  double E0[7] = {0}, E1[7] = {0}, E2[7] = {0};
  for (size_t t = 0; t < w->n; t++) {
    if (tf_isnan(w->y[t]))
      continue;
    int j = cls(w, t);
    double e = exp(offv(w, t) + r * (double)t - mx[j]);
    double u = (double)(t - (size_t)w->tfirst[j]);
    E0[j] += e;
    E1[j] += e * u;
  }
  for (int j = 0; j < nc; j++) {
    logE0[j] = mx[j] + log(E0[j]);
    m[j] = E1[j] / E0[j];
  }
  for (size_t t = 0; t < w->n; t++) {
    if (tf_isnan(w->y[t]))
      continue;
    int j = cls(w, t);
    double e = exp(offv(w, t) + r * (double)t - mx[j]);
    double d = (double)(t - (size_t)w->tfirst[j]) - m[j];
    E2[j] += e * d * d;
  }
  for (int j = 0; j < nc; j++) {
    V[j] = E2[j] / E0[j];
    m[j] += (double)w->tfirst[j];
  }
}

/* Poisson profile log-likelihood at r without its constant terms, and its
 * first two derivatives. */
static double pois_prof(const win_t *w, double r, double *d1, double *d2,
                        double *b) {
  double lE[7], m[7], V[7];
  pois_moments(w, r, lE, m, V);
  double l = r * w->T, g = w->T, h = 0.0;
  for (int j = 0; j < w->nc; j++) {
    l -= w->Y[j] * lE[j];
    g -= w->Y[j] * m[j];
    h += w->Y[j] * V[j];
    if (b)
      b[j] = log(w->Y[j]) - lE[j];
  }
  if (d1)
    *d1 = g;
  if (d2)
    *d2 = -h;
  return l;
}

/* Solve l_p'(r) = 0 by Newton safeguarded with a bracket.  Returns the
 * number of iterations, or -1 without convergence. */
static int pois_solve(const win_t *w, double r0, int maxit, double tol,
                      double *r_out, double *h_out) {
  double r = isfinite(r0) ? r0 : 0.0;
  double lo = -INFINITY, hi = INFINITY;
  for (int it = 1; it <= maxit; it++) {
    double g, d2;
    pois_prof(w, r, &g, &d2, NULL);
    double h = -d2;
    if (!(h > 0.0) || !isfinite(g))
      return -1;
    if (g == 0.0) { /* exactly stationary: no bracket update */
      *r_out = r;
      *h_out = h;
      return it;
    }
    if (g > 0.0)
      lo = r > lo ? r : lo;
    else
      hi = r < hi ? r : hi;
    double step = g / h;
    double lam2 = g * step;
    if (step > 0.5)
      step = 0.5;
    else if (step < -0.5)
      step = -0.5;
    double rn = r + step;
    if (!(rn > lo && rn < hi) && isfinite(lo) && isfinite(hi))
      rn = 0.5 * (lo + hi);
    r = rn;
    if (lam2 < tol) {
      pois_prof(w, r, NULL, &d2, NULL);
      *r_out = r;
      *h_out = -d2;
      return it;
    }
  }
  return -1;
}

/* ------------------------------------------------------------------ */
/* NB2                                                                 */
/* ------------------------------------------------------------------ */

typedef struct {
  double r;
  double b[7];
  double theta;
  int capped;
  int iter;
} nbpar;

/* The per-day kernel is inlined into each caller, so that the flags
 * (constants there) select its terms at compile time. */
#if defined(__GNUC__)
#define NB_INLINE static inline __attribute__((always_inline))
#else
#define NB_INLINE static inline
#endif

/* Knuth's TwoSum (Knuth 1969, TAOCP vol. 2, 4.2.2): the same compensated
 * sum as ks_add, without branches. */
NB_INLINE void ks_add2(ksum *k, double v) {
  double t = k->s + v;
  double bp = t - k->s;
  k->c += (k->s - (t - bp)) + (v - bp);
  k->s = t;
}

/* What one theta needs for the days' theta scores: psi(theta),
 * psi'(theta) (if ds), log theta - psi(theta) and 1/theta. */
typedef struct {
  double th, ps0, ps1, cth, ith;
} nbth;

static void nbth_init(nbth *c, double th, int ds) {
  c->th = th;
  c->ith = 1.0 / th;
  c->ps0 = tf_digamma(th);
  c->ps1 = ds ? tf_trigamma(th) : 0.0;
  c->cth = th >= 10.0 ? -tf_psi_mlog(th) : log(th) - c->ps0;
}

/* A day's term of the theta score dl/dtheta,
 *     psi(theta + y) - psi(theta) - log(1 + m/theta) + (m - y)/(m + theta),
 * and (ds not NULL) of its derivative in theta; id = 1/(theta + m).  For
 * theta + y >= 10 below theta = 1e3 the psi difference and the logarithm
 * share one logarithm:
 *     psi(theta + y) - psi(theta) - log(1 + m/theta)
 *       = (log theta - psi(theta)) + log((theta + y)/(theta + m))
 *         + (psi(theta + y) - log(theta + y)),
 * the first once per theta, the last from the series; elsewhere psidiff. */
/* whole: the value as said above.  Otherwise without its logarithm,
 * log((theta + y)/(theta + m)) or -log1p(m/theta), whose argument goes to
 * *ratio ((theta + y)/(theta + m) or theta/(theta + m)): the caller adds
 * the logarithms of a window's days as one log of their product, where
 * the terms are of order one (below theta = 1e3, summed plainly: the
 * ratio's rounding costs about 1e-16 absolute, as log1p's would). */
NB_INLINE double nb_sday_part(const nbth *c, double y, double m, double id,
                              double ix, double *ds, double *ratio,
                              int whole) {
  double th = c->th;
  if (th < 1e3 && th + y >= 10.0) {
    double x = th + y, ps = tf_psi_mlog_inv(ix);
    if (ds)
      *ds = tf_tri_ser_inv(ix) - c->ps1 + m * id * c->ith - (m - y) * id * id;
    /* log of the ratio (theta + y)/(theta + m): its absolute error, about
     * 1e-16, is what log1p would leave in the sum */
    if (whole)
      return c->cth + log(x * id) + ps + (m - y) * id;
    *ratio = x * id;
    return c->cth + ps + (m - y) * id;
  }
  double d1, d2 = 0.0;
  psidiff(th, y, c->ps0, c->ps1, &d1, ds ? &d2 : NULL);
  if (ds)
    *ds = -d2 + m * id * c->ith - (m - y) * id * id;
  if (whole)
    return d1 - log1p(m / th) + (m - y) * id;
  *ratio = th * id;
  return d1 + (m - y) * id;
}

NB_INLINE double nb_sday(const nbth *c, double y, double m, double id,
                         double ix, double *ds) {
  return nb_sday_part(c, y, m, id, ix, ds, NULL, 1);
}

/* 1/(theta + m) and 1/(theta + y) from one division (theta, m, y >= 0,
 * theta > 0), or two where the product leaves the range. */
NB_INLINE void nb_recip2(double th, double m, double y, double *id,
                         double *ix) {
  double den = th + m, x = th + y, rr = 1.0 / (den * x);
  if (rr > 0.0 && rr <= DBL_MAX) {
    *id = x * rr;
    *ix = den * rr;
  } else {
    *id = 1.0 / den;
    *ix = 1.0 / x;
  }
}

/* The sums of one pass over the window at (beta, theta), as flags ask:
 * NBK_BETA the score U of beta (G, gr) and its observed information (the
 * arrow H, Hr, Hrr); NBK_C the mixed derivative d2l/dbeta dtau (C, Cr);
 * NBK_I the expected information X'WX (I, Ir, Irr); NBK_S the score of
 * theta S = dl/dtheta and NBK_DS its derivative DS; NBK_LL the
 * log-likelihood without its theta-only and y-only terms.  mu[t] gets the
 * mean of each present day t (and, with NBK_C, mu[w->n + t] its 1/(theta +
 * mu), for cr_score).  The days are taken class by class; without
 * an offset the means of a class are made from one exponential by
 * multiplying by e^{r step}, anew from exp every 8 days (relative error
 * below 1e-15). */
typedef struct {
  double G[7], H[7], Hr[7], C[7], I[7], Ir[7];
  double gr, Hrr, Cr, Irr, S, DS, ll;
} nbsums;

enum { NBK_BETA = 1, NBK_C = 2, NBK_I = 4, NBK_S = 8, NBK_DS = 16,
       NBK_LL = 32 };

/* One present day's terms of a kernel pass (flags f) at mean m: id =
 * 1/(theta + m), the terms s, h of the beta score and information, cc
 * of the mixed derivative, W of the expected information, and sd, ds
 * of the theta score and its derivative, whole (nb_sday) or without its
 * logarithm, whose argument goes to ratio (nb_sday_part); c is read only
 * with NBK_S.  Shared by nb_kernel_n and the lanes nb_kernel_p21 takes
 * one at a time. */
typedef struct {
  double id, s, h, cc, W, sd, ds, ratio;
} nbday;

NB_INLINE void nb_day(const nbth *c, unsigned f, double th, double y,
                      double m, int whole, nbday *o) {
  double id, ix = 0.0;
  if (f & NBK_S)
    nb_recip2(th, m, y, &id, &ix);
  else
    id = 1.0 / (th + m);
  o->id = id;
  if (f & NBK_BETA) {
    o->s = th * (y - m) * id;
    o->h = th * m * (th + y) * id * id;
  }
  if (f & NBK_C)
    o->cc = th * m * (y - m) * id * id;
  if (f & NBK_I)
    o->W = th * m * id;
  if (f & NBK_S) {
    o->ds = 0.0;
    o->ratio = 1.0;
    double *ds = (f & NBK_DS) ? &o->ds : NULL;
    o->sd = whole ? nb_sday(c, y, m, id, ix, ds)
                  : nb_sday_part(c, y, m, id, ix, ds, &o->ratio, 0);
  }
}

/* The running product lp of the days' ratios (in [1e-200, 1e200]),
 * folded into the sum of logarithms Sl before it leaves that range; a
 * ratio outside [1e-100, 1e100] by its own logarithm. */
NB_INLINE void nb_ratio_add(double *lp, double *Sl, double ratio) {
  if (ratio > 1e-100 && ratio < 1e100) {
    *lp *= ratio;
    if (!(*lp > 1e-200 && *lp < 1e200)) {
      *Sl += log(*lp);
      *lp = 1.0;
    }
  } else {
    *Sl += log(ratio);
  }
}

NB_INLINE void nb_kernel_n(const win_t *w, const nbpar *p, unsigned f,
                           double *mu, nbsums *z, int nc, size_t n) {
  double th = p->theta;
  nbth c;
  if (f & NBK_S)
    nbth_init(&c, th, (f & NBK_DS) != 0);
  if (nc != 7)
    memset(z, 0, sizeof *z); /* with seven classes every sum is set below */
  ksum S = {0, 0}, D = {0, 0}, L = {0, 0};
  size_t step = nc == 7 ? 7 : 1;
  double e = w->off ? 0.0 : exp(p->r * (double)step);
  double gr = 0.0, Hrr = 0.0, Cr = 0.0, Irr = 0.0;
  /* the theta score is summed with compensation from theta = 1e3 on,
   * where its terms cancel to O(1/theta^2); below, its few terms of
   * order one lose nothing that matters to plain sums */
  int comp = th >= 1e3;
  double Sp = 0.0, Dp = 0.0;
  /* below theta = 1e3 the days' log ratios as one log of their product
   * (lp, folded into Sl before it could leave [1e-200, 1e200]; a ratio
   * outside [1e-100, 1e100] by its own log) */
  double lp = 1.0, Sl = 0.0;
  for (int j = 0; j < nc; j++) {
    size_t t0 = nc == 7 ? cls_first(w, j) : 0; /* class j's first day */
    double G = 0.0, H = 0.0, Hr = 0.0, C = 0.0, I = 0.0, Ir = 0.0;
    double m = 0.0;
    unsigned k = 0;
    for (size_t t = t0; t < n; t += step, k++) {
      double tt = (double)t;
      if (w->off || (k & 7u) == 0)
        m = exp(offv(w, t) + p->b[j] + p->r * tt);
      else
        m *= e;
      double y = w->y[t];
      if (tf_isnan(y))
        continue;
      mu[t] = m;
      nbday q;
      nb_day(&c, f, th, y, m, comp, &q);
      if (f & NBK_C)
        mu[w->n + t] = q.id; /* for cr_score */
      if (f & NBK_BETA) {
        G += q.s;
        gr += q.s * tt;
        H += q.h;
        Hr += q.h * tt;
        Hrr += q.h * tt * tt;
      }
      if (f & NBK_C) {
        C += q.cc;
        Cr += q.cc * tt;
      }
      if (f & NBK_I) {
        I += q.W;
        Ir += q.W * tt;
        Irr += q.W * tt * tt;
      }
      if (f & NBK_S) {
        if (comp) {
          ks_add2(&S, q.sd);
          if (f & NBK_DS)
            ks_add2(&D, q.ds);
        } else {
          Sp += q.sd;
          Dp += q.ds;
          nb_ratio_add(&lp, &Sl, q.ratio);
        }
      }
      if (f & NBK_LL) {
        double eta = offv(w, t) + p->b[j] + p->r * tt;
        ks_add2(&L, y * eta - (y + th) * log1p(m / th));
      }
    }
    z->G[j] = G;
    z->H[j] = H;
    z->Hr[j] = Hr;
    z->C[j] = C;
    z->I[j] = I;
    z->Ir[j] = Ir;
  }
  z->gr = gr;
  z->Hrr = Hrr;
  z->Cr = Cr;
  z->Irr = Irr;
  z->S = comp ? ks_val(&S) : Sp + (Sl + (lp == 1.0 ? 0.0 : log(lp)));
  z->DS = comp ? ks_val(&D) : Dp;
  z->ll = ks_val(&L);
}

/* nb_kernel_n for 21-day windows with weekday effects and no offset
 * (the rolling default), two weekday classes at a time in the lanes of
 * a tf_v2d: classes (0, 1), (2, 3), (4, 5), and class 6 in both lanes of
 * a fourth pair whose second lane is dropped.  Each lane computes a
 * day's terms with the operations of nb_kernel_n in the same order, so
 * the class sums (G, H, Hr, C, I, Ir) are those of nb_kernel_n to the
 * bit; the window sums (gr, Hrr, Cr, Irr, S, DS) are added per lane and
 * then across, an order of the same additions that differs from
 * nb_kernel_n's by rounding only (about 1e-16 relative).  On the first
 * 600 benchmark districts the rolling rates and interval ends stay
 * within 9.7e-11 of nb_kernel_n's, relative to the larger of |r| and
 * the interval's width (the fits' own tolerances), with the same
 * statuses.  (An inline two-lane exponential for the first means, with
 * fewer instructions than two calls of exp, was no faster in
 * interleaved runs, and was left out.)  A day pair
 * with a missing day, theta + y below 10 (psidiff), a product out of
 * range for nb_recip2's one division, or a ratio out of [1e-100, 1e100]
 * is done lane by lane with nb_kernel_n's own terms (nb_day).  Not for
 * NBK_LL, an offset, or NBK_S at theta >= 1e3 (compensated sums):
 * nb_kernel takes nb_kernel_n there. */
typedef struct {
  tf_v2d gr, Hrr, Cr, Irr, Sp, Dp, lp, Sl;
} nbp21;

/* lane-wise comparisons of tf_v2d: all bits set where true; tf_v2l_all
 * tests both lanes (with SSE2, from the sign bits in one instruction) */
typedef long long tf_v2l __attribute__((vector_size(2 * sizeof(long long))));
static inline int tf_v2l_all(tf_v2l m) {
#ifdef __SSE2__
  return _mm_movemask_pd((__m128d)m) == 3;
#else
  return m[0] != 0 && m[1] != 0;
#endif
}

/* The days of classes ja and jb (lanes 0 and 1) into the class sums of
 * z and the window sums of acc. */
NB_INLINE void nb_p21_pair(const win_t *w, const nbpar *p, unsigned f,
                           const nbth *c, tf_v2d e2, int ja, int jb,
                           double *mu, nbsums *z, nbp21 *acc) {
  enum { N = 21 };
  const tf_v2d zero = {0.0, 0.0}, one = {1.0, 1.0};
  double th = p->theta;
  const tf_v2d thv = {th, th};
  size_t ta = cls_first(w, ja), tb = cls_first(w, jb);
  tf_v2d G = zero, H = zero, Hr = zero, C = zero, I = zero, Ir = zero;
  tf_v2d m = zero, tt = {(double)(int)ta, (double)(int)tb};
  const tf_v2d seven = {7.0, 7.0};
#pragma GCC unroll 3
  for (size_t k = 0; k < N / 7; k++, tt += seven) {
    size_t t0 = ta + 7 * k, t1 = tb + 7 * k;
    if (k == 0)
      m = (tf_v2d){exp(p->b[ja] + p->r * tt[0]), exp(p->b[jb] + p->r * tt[1])};
    else
      m *= e2;
    double y0 = w->y[t0], y1 = w->y[t1];
    tf_v2d y = {y0, y1};
    tf_v2d id, ix = zero, x = thv + y, den = thv + m;
    tf_v2l ok = y == y; /* present days */
    tf_v2d ratio = one, pr = one;
    if (f & NBK_S) {
      tf_v2d rr = one / (den * x);
      id = x * rr;
      ix = den * rr;
      ratio = x * id;
      pr = acc->lp * ratio;
      ok &= (rr > 0.0) & (rr <= DBL_MAX) & (x >= 10.0) & (ratio > 1e-100) &
            (ratio < 1e100) & (pr > 1e-200) & (pr < 1e200);
    } else {
      id = one / den;
    }
    tf_v2d s = zero, h = zero, cc = zero, W = zero, sd = zero, ds = zero;
    if (tf_v2l_all(ok)) {
      mu[t0] = m[0];
      mu[t1] = m[1];
      if (f & NBK_C) {
        mu[N + t0] = id[0];
        mu[N + t1] = id[1];
      }
      if (f & NBK_BETA) {
        s = thv * (y - m) * id;
        h = thv * m * (thv + y) * id * id;
      }
      if (f & NBK_C)
        cc = thv * m * (y - m) * id * id;
      if (f & NBK_I)
        W = thv * m * id;
      if (f & NBK_S) {
        /* nb_sday_part for theta < 1e3, theta + y >= 10, lane-wise */
        tf_v2d zz = ix * ix, z2 = zz * zz, z4 = z2 * z2;
        tf_v2d p01 = 1.0 / 12.0 - zz * (1.0 / 120.0);
        tf_v2d p23 = 1.0 / 252.0 - zz * (1.0 / 240.0);
        tf_v2d p45 = 1.0 / 132.0 - zz * (691.0 / 32760.0);
        tf_v2d ps =
            -0.5 * ix - zz * (p01 + z2 * p23 + z4 * (p45 + z2 * (1.0 / 12.0)));
        if (f & NBK_DS) {
          tf_v2d t01 = 1.0 / 6.0 - zz * (1.0 / 30.0);
          tf_v2d t23 = 1.0 / 42.0 - zz * (1.0 / 30.0);
          tf_v2d t45 = 5.0 / 66.0 - zz * (691.0 / 2730.0);
          tf_v2d tri = ix * (1.0 + ix * (0.5 + ix * (t01 + z2 * t23 +
                                                    z4 * (t45 + z2 * (7.0 / 6.0)))));
          ds = tri - c->ps1 + m * id * c->ith - (m - y) * id * id;
        }
        sd = c->cth + ps + (m - y) * id;
        acc->lp = pr;
      }
    } else {
      size_t tl[2] = {t0, t1};
      for (int l = 0; l < 2; l++) {
        double yl = y[l], ml = m[l];
        if (tf_isnan(yl))
          continue; /* no terms: the sums add zeros, the product 1 */
        mu[tl[l]] = ml;
        nbday q;
        nb_day(c, f, th, yl, ml, 0, &q);
        if (f & NBK_C)
          mu[N + tl[l]] = q.id;
        if (f & NBK_BETA) {
          s[l] = q.s;
          h[l] = q.h;
        }
        if (f & NBK_C)
          cc[l] = q.cc;
        if (f & NBK_I)
          W[l] = q.W;
        if (f & NBK_S) {
          sd[l] = q.sd;
          ds[l] = q.ds;
          double lpl = acc->lp[l], sll = acc->Sl[l];
          nb_ratio_add(&lpl, &sll, q.ratio);
          acc->lp[l] = lpl;
          acc->Sl[l] = sll;
        }
      }
    }
    G += s;
    H += h;
    Hr += h * tt;
    C += cc;
    I += W;
    Ir += W * tt;
    acc->gr += s * tt;
    acc->Hrr += h * tt * tt;
    acc->Cr += cc * tt;
    acc->Irr += W * tt * tt;
    if (f & NBK_S) {
      acc->Sp += sd;
      acc->Dp += ds;
    }
  }
  z->G[ja] = G[0];
  z->H[ja] = H[0];
  z->Hr[ja] = Hr[0];
  z->C[ja] = C[0];
  z->I[ja] = I[0];
  z->Ir[ja] = Ir[0];
  if (jb != ja) {
    z->G[jb] = G[1];
    z->H[jb] = H[1];
    z->Hr[jb] = Hr[1];
    z->C[jb] = C[1];
    z->I[jb] = I[1];
    z->Ir[jb] = Ir[1];
  }
}

NB_INLINE void nb_kernel_p21(const win_t *w, const nbpar *p, unsigned f,
                             double *mu, nbsums *z) {
  nbth c;
  if (f & NBK_S)
    nbth_init(&c, p->theta, (f & NBK_DS) != 0);
  const tf_v2d zero = {0.0, 0.0}, one = {1.0, 1.0};
  double ev = exp(p->r * 7.0);
  const tf_v2d e2 = {ev, ev};
  /* pairs (0, 1), (2, 3), (4, 5) into a; (6, 6) into b, its lane 1
   * dropped */
  nbp21 a = {zero, zero, zero, zero, zero, zero, one, zero};
  nbp21 b = a;
  nb_p21_pair(w, p, f, &c, e2, 0, 1, mu, z, &a);
  nb_p21_pair(w, p, f, &c, e2, 2, 3, mu, z, &a);
  nb_p21_pair(w, p, f, &c, e2, 4, 5, mu, z, &a);
  nb_p21_pair(w, p, f, &c, e2, 6, 6, mu, z, &b);
  z->gr = a.gr[0] + a.gr[1] + b.gr[0];
  z->Hrr = a.Hrr[0] + a.Hrr[1] + b.Hrr[0];
  z->Cr = a.Cr[0] + a.Cr[1] + b.Cr[0];
  z->Irr = a.Irr[0] + a.Irr[1] + b.Irr[0];
  if (f & NBK_S) {
    /* the three products, each in [1e-200, 1e200], into one logarithm
     * while their running product stays in range */
    double P = 1.0, L = a.Sl[0] + a.Sl[1] + b.Sl[0];
    double v[3] = {a.lp[0], a.lp[1], b.lp[0]};
    for (int i = 0; i < 3; i++) {
      double np = P * v[i];
      if (np > 1e-200 && np < 1e200)
        P = np;
      else
        L += log(v[i]);
    }
    z->S = (a.Sp[0] + a.Sp[1] + b.Sp[0]) + (L + (P == 1.0 ? 0.0 : log(P)));
    z->DS = a.Dp[0] + a.Dp[1] + b.Dp[0];
  } else {
    z->S = z->DS = 0.0;
  }
  z->ll = 0.0;
}

/* The pass over the window: nb_kernel_p21 where it applies, else
 * nb_kernel_n with the window's classes and length, 21-day windows with
 * weekday effects (the rolling default) with both known at compile
 * time, so that the three days of each class are unrolled. */
NB_INLINE void nb_kernel(const win_t *w, const nbpar *p, unsigned f,
                         double *mu, nbsums *z) {
  if (w->nc == 7 && w->n == 21 && !w->off && !(f & NBK_LL) &&
      (!(f & NBK_S) || p->theta < 1e3))
    nb_kernel_p21(w, p, f, mu, z);
  else if (w->nc == 7 && w->n == 21)
    nb_kernel_n(w, p, f, mu, z, 7, 21);
  else
    nb_kernel_n(w, p, f, mu, z, w->nc, w->n);
}

/* The expected-information SE of r from the sums (NBK_I): the inverse
 * root of the Schur complement of X'WX in r; NAN if not positive. */
static double nb_se_sums(const nbsums *z, int nc) {
  double sch = z->Irr;
  for (int j = 0; j < nc; j++) {
    if (!(z->I[j] > 0.0))
      return NAN;
    sch -= z->Ir[j] * z->Ir[j] / z->I[j];
  }
  return sch > 0.0 ? 1.0 / sqrt(sch) : NAN;
}

/* Newton on (r, b) at fixed theta; r held fixed if fixr.  Returns
 * iterations or -1. */
static int nb_beta_from(const win_t *w, nbpar *p, int fixr, int maxit,
                        double tol, double *mu, double lam2prev) {
  int nc = w->nc;
  double lprev = -INFINITY;
  nbpar prev = *p;
  double step_r = 0.0, step_b[7] = {0};
  int halvings = 0;
  for (int it = 1; it <= maxit * 4; it++) {
    /* the log-likelihood guards the steps; once the Newton decrement
     * has fallen below 1e-2 (steps of a tenth of a standard error) the
     * steps are not checked, and no log1p per day is spent on it */
    int need_ll = halvings > 0 || !(lam2prev < 1e-2);
    nbsums z;
    if (need_ll)
      nb_kernel(w, p, NBK_BETA | NBK_LL, mu, &z);
    else
      nb_kernel(w, p, NBK_BETA, mu, &z);
    const double *G = z.G, *H = z.H, *Hr = z.Hr;
    double gr = z.gr, Hrr = z.Hrr;
    double lv = need_ll ? z.ll : -INFINITY;
    if (need_ll ? !isfinite(lv) : !isfinite(gr))
      return -1;
    if (need_ll && lv < lprev - 1e-12 * fabs(lprev) && halvings < 40) {
      /* backtrack from the previous point */
      halvings++;
      double f = ldexp(1.0, -halvings);
      p->r = prev.r + f * step_r;
      for (int j = 0; j < nc; j++)
        p->b[j] = prev.b[j] + f * step_b[j];
      continue;
    }
    halvings = 0;
    double dr = 0.0, db[7];
    if (!fixr) {
      double sch = Hrr, rhs = gr;
      for (int j = 0; j < nc; j++) {
        if (!(H[j] > 0.0))
          return -1;
        sch -= Hr[j] * Hr[j] / H[j];
        rhs -= Hr[j] * G[j] / H[j];
      }
      if (!(sch > 0.0))
        return -1;
      dr = rhs / sch;
    }
    double lam2 = dr * gr;
    for (int j = 0; j < nc; j++) {
      if (!(H[j] > 0.0))
        return -1;
      db[j] = (G[j] - Hr[j] * dr) / H[j];
      lam2 += db[j] * G[j];
    }
    prev = *p;
    lprev = lv;
    lam2prev = lam2;
    /* limit wild steps on the log scale */
    double mx = fabs(dr) * (double)w->n;
    for (int j = 0; j < nc; j++)
      if (fabs(db[j]) > mx)
        mx = fabs(db[j]);
    double f = mx > 5.0 ? 5.0 / mx : 1.0;
    step_r = f * dr;
    for (int j = 0; j < nc; j++)
      step_b[j] = f * db[j];
    p->r += step_r;
    for (int j = 0; j < nc; j++)
      p->b[j] += step_b[j];
    if (lam2 < tol && f == 1.0)
      return it;
  }
  return -1;
}

static int nb_beta(const win_t *w, nbpar *p, int fixr, int maxit, double tol,
                   double *mu) {
  return nb_beta_from(w, p, fixr, maxit, tol, mu, INFINITY);
}

/* Newton on tau = log theta at fixed mu (MASS theta.ml score and
 * information), with steps of flat in tau where the log-likelihood is
 * not concave in tau, and at most maxit steps.  Returns the change in
 * tau, NAN on failure; *dec gets the Newton decrement in tau at the start
 * (log-likelihood units). */
static double nb_theta(const win_t *w, nbpar *p, const double *mu,
                       double flat, int maxit, double *dec) {
  double tau0 = log(p->theta), tau = tau0;
  const double taucap = log(TF_THETA_CAP);
  p->capped = 0;
  for (int it = 0; it < maxit; it++) {
    double th = exp(tau);
    nbth c;
    nbth_init(&c, th, 1);
    ksum S = {0, 0}, D = {0, 0};
    for (size_t t = 0; t < w->n; t++) {
      double y = w->y[t];
      if (tf_isnan(y))
        continue;
      double m = mu[t], ds, id, ix;
      nb_recip2(th, m, y, &id, &ix);
      ks_add(&S, nb_sday(&c, y, m, id, ix, &ds));
      ks_add(&D, ds); /* dS/dtheta */
    }
    double s = ks_val(&S), ds = ks_val(&D);
    double g = th * s;                 /* dl/dtau   */
    double hh = th * s + th * th * ds; /* d2l/dtau2 */
    double step;
    if (hh < 0.0)
      step = -g / hh;
    else
      step = g > 0.0 ? flat : -flat;
    if (it == 0)
      *dec = hh < 0.0 ? -g * g / hh : INFINITY;
    if (tau >= taucap && g > 0.0) {
      p->capped = 1;
      tau = taucap;
      break;
    }
    if (step > 3.0)
      step = 3.0;
    if (step < -3.0)
      step = -3.0;
    double tn = tau + step;
    if (tn >= taucap) {
      if (tau >= taucap) {
        p->capped = 1;
        tau = taucap;
        break;
      }
      tn = taucap;
    }
    if (tn < -25.0)
      tn = -25.0;
    double dt = tn - tau;
    tau = tn;
    if (fabs(dt) < 1e-11)
      break;
    if (!isfinite(tau))
      return NAN;
  }
  if (tau >= taucap) {
    tau = taucap;
    p->capped = 1;
  }
  p->theta = exp(tau);
  return tau - tau0;
}

/* Whether the theta score at the cap (means mu, theta = TF_THETA_CAP) is
 * clearly positive, from its series in u = 1/theta: a day's term
 *     sum_{k<y} 1/(theta + k) - log(1 + m/theta) + (m - y)/(m + theta)
 * is u^2 (c2 + c3 u + c4 u^2 + O(u^3)) with (expanding each part in u)
 *     c2 = (y - (y - m)^2)/2,
 *     c3 = sum k^2 - m^3/3 + (m - y) m^2,
 *     c4 = -sum k^3 + m^4/4 - (m - y) m^3,
 * sums over k < y (Faulhaber's formulas): no logarithm or psi per day.
 * Clearly: the sum above 1e-6 times the sum of |c2|, far above the
 * truncation (relative (y/theta)^3) and the rounding of either method;
 * otherwise nb_theta decides. */
static int nb_cap_up(const win_t *w, const double *mu) {
  const double u = 1.0 / TF_THETA_CAP;
  ksum S = {0, 0};
  double sc = 0.0;
  for (size_t t = 0; t < w->n; t++) {
    double y = w->y[t];
    if (tf_isnan(y))
      continue;
    double m = mu[t], d = y - m, a = 0.5 * y * (y - 1.0);
    double k2 = y * (y - 1.0) * (2.0 * y - 1.0) / 6.0;
    double c2 = 0.5 * (y - d * d);
    double c3 = k2 - m * m * m / 3.0 - d * m * m;
    double c4 = -a * a + 0.25 * m * m * m * m + d * m * m * m;
    ks_add(&S, c2 + u * (c3 + u * c4));
    sc += fabs(c2);
  }
  double v = ks_val(&S);
  return isfinite(v) && v > 1e-6 * sc;
}

/* Fill mu[t] for the present days t (the kernel without sums). */
static void nb_mu(const win_t *w, const nbpar *p, double *mu) {
  nbsums z;
  nb_kernel(w, p, 0u, mu, &z);
}

/* Full NB2 fit by alternation.  mu is scratch of 2 w->n doubles.  Returns
 * 0 or -1 (no convergence). */
static int nb_fit(const win_t *w, nbpar *p, int fixr, int maxit, double tol,
                  double *mu) {
  int total = 0;
  for (int outer = 0; outer < 4 * maxit; outer++) {
    int it = nb_beta(w, p, fixr, maxit, tol, mu);
    if (it < 0)
      return -1;
    total += it;
    nb_mu(w, p, mu);
    double dec = INFINITY;
    double dt = nb_theta(w, p, mu, 1.0, 60, &dec);
    if (tf_isnan(dt))
      return -1;
    /* stationary in beta (no Newton step needed beyond the first) and in
     * theta (tiny step, or a Newton decrement below the tolerance, which
     * covers the flat likelihood near the cap) */
    if (it <= 1 && (fabs(dt) < 1e-10 || dec < tol * 1e-2 ||
                    (p->capped && fabs(dt) < 1e-6))) {
      p->iter = total;
      return 0;
    }
  }
  return -1;
}

/* Full NB2 log-likelihood (lgamma terms included, as statsmodels' llf). */
static double nb_loglik(const win_t *w, const nbpar *p) {
  ksum l = {0, 0};
  double th = p->theta;
  for (size_t t = 0; t < w->n; t++) {
    double y = w->y[t];
    if (tf_isnan(y))
      continue;
    double eta = offv(w, t) + p->b[cls(w, t)] + p->r * (double)t;
    double mu = exp(eta);
    double lt = log(th + mu);
    ks_add(&l, lnpoch(th, y) - lfact(y) - th * log1p(mu / th) +
                   (y > 0.0 ? y * (eta - lt) : 0.0));
  }
  return ks_val(&l);
}

/* Expected-information SE of r, and (pearson not NULL) Pearson X^2 and
 * deviance at p; mu is scratch of 2 w->n doubles. */
static void nb_stats(const win_t *w, const nbpar *p, double *se,
                     double *pearson, double *dev, double *mu) {
  double th = p->theta;
  nbsums z;
  nb_kernel(w, p, NBK_I, mu, &z);
  *se = nb_se_sums(&z, w->nc);
  if (pearson == NULL)
    return;
  ksum X2 = {0, 0}, D = {0, 0};
  for (size_t t = 0; t < w->n; t++) {
    double y = w->y[t];
    if (tf_isnan(y))
      continue;
    double m = mu[t];
    double v = m + m * m / th;
    ks_add(&X2, (y - m) * (y - m) / v);
    double dd = (y > 0.0 ? y * log(y / m) : 0.0) -
                (y + th) * log1p((y - m) / (m + th));
    ks_add(&D, 2.0 * dd);
  }
  *pearson = ks_val(&X2);
  *dev = ks_val(&D);
}

/* ------------------------------------------------------------------ */
/* Profile-likelihood roots                                            */
/* ------------------------------------------------------------------ */

typedef struct {
  const win_t *w;
  int model;
  int maxit;
  double tol;
  nbpar nb;    /* warm start for NB refits */
  double *mu;  /* scratch */
  int fail;
} prof_ctx;

/* Profile log-likelihood (up to a constant common to all r) and its
 * derivative at r. */
static double prof_eval(prof_ctx *c, double r, double *d1) {
  if (c->model != TWOFOLD_MODEL_NEGBIN) {
    double l = pois_prof(c->w, r, d1, NULL, NULL);
    return l;
  }
  c->nb.r = r;
  if (nb_fit(c->w, &c->nb, 1, c->maxit, c->tol, c->mu) != 0) {
    c->fail = 1;
    *d1 = NAN;
    return NAN;
  }
  /* score for r at the constrained optimum */
  nbsums z;
  nb_kernel(c->w, &c->nb, NBK_BETA, c->mu, &z);
  *d1 = z.gr;
  return nb_loglik(c->w, &c->nb);
}

/* Find r on side s (+1 or -1) of rhat with l_p(r) = target.  step0 is a
 * first guess of the distance.  Returns NAN on failure. */
static double prof_root(prof_ctx *c, double rhat, double lhat, double target,
                        double s, double step0, const nbpar *at_hat) {
  double a = rhat, fa = lhat - target; /* fa > 0 */
  double d = step0;
  double b = NAN, fb = NAN, db;
  if (c->model == TWOFOLD_MODEL_NEGBIN)
    c->nb = *at_hat;
  for (int k = 0; k < 80; k++) {
    double rb = rhat + s * d;
    fb = prof_eval(c, rb, &db) - target;
    if (c->fail || tf_isnan(fb))
      return NAN;
    if (fb < 0.0) {
      b = rb;
      break;
    }
    a = rb;
    fa = fb;
    d *= 2.0;
  }
  if (tf_isnan(b))
    return NAN;
  /* safeguarded Newton on [a, b]: f(a) > 0 > f(b) */
  double x = a + (b - a) * fa / (fa - fb);
  double tolx = 1e-11 * (fabs(step0) + fabs(rhat)) + 1e-15;
  for (int k = 0; k < 200; k++) {
    double dx;
    double fx = prof_eval(c, x, &dx) - target;
    if (c->fail || tf_isnan(fx))
      return NAN;
    if (fx == 0.0)
      return x;
    if (fx > 0.0) {
      a = x;
      fa = fx;
    } else {
      b = x;
      fb = fx;
    }
    double xn = x - fx / dx;
    double lo = a < b ? a : b, hi = a < b ? b : a;
    if (!(xn > lo && xn < hi) || !isfinite(xn))
      xn = 0.5 * (a + b);
    if (fabs(xn - x) < tolx || fabs(b - a) < tolx)
      return xn;
    x = xn;
  }
  return x;
}

/* ------------------------------------------------------------------ */
/* Cox-Reid adjusted theta                                             */
/* ------------------------------------------------------------------ */

/* Solve the arrow system (H, Hr, Hrr) x = (v, vr): x = (xb, xr).  Returns
 * -1 if it is not positive definite. */
static int arrow_solve(const nbsums *z, int nc, const double *v, double vr,
                       double *xb, double *xr) {
  double sch = z->Hrr, rhs = vr;
  for (int j = 0; j < nc; j++) {
    if (!(z->H[j] > 0.0))
      return -1;
    sch -= z->Hr[j] * z->Hr[j] / z->H[j];
    rhs -= z->Hr[j] * v[j] / z->H[j];
  }
  if (!(sch > 0.0))
    return -1;
  *xr = rhs / sch;
  for (int j = 0; j < nc; j++)
    xb[j] = (v[j] - z->Hr[j] * *xr) / z->H[j];
  return 0;
}

/* arrow_solve for two right-hand sides, (v, vr) -> (xb, xr) and (u, ur)
 * -> (yb, yr), with one reciprocal per diagonal element. */
static int arrow_solve2(const nbsums *z, int nc, const double *v, double vr,
                        const double *u, double ur, double *xb, double *xr,
                        double *yb, double *yr) {
  double iH[7], sch = z->Hrr, rv = vr, ru = ur;
  for (int j = 0; j < nc; j++) {
    if (!(z->H[j] > 0.0))
      return -1;
    iH[j] = 1.0 / z->H[j];
    double a = z->Hr[j] * iH[j];
    sch -= a * z->Hr[j];
    rv -= a * v[j];
    ru -= a * u[j];
  }
  if (!(sch > 0.0))
    return -1;
  double is = 1.0 / sch;
  *xr = rv * is;
  *yr = ru * is;
  for (int j = 0; j < nc; j++) {
    xb[j] = (v[j] - z->Hr[j] * *xr) * iH[j];
    yb[j] = (u[j] - z->Hr[j] * *yr) * iH[j];
  }
  return 0;
}

/* The derivative of the Cox-Reid adjusted profile log-likelihood in tau
 * (cr_grad) at a point where beta = beta_theta, from the sums of a pass
 * there (NBK_BETA | NBK_C | NBK_I | NBK_S) and its means: theta S minus
 * half d/dtau log det X'WX, dbeta/dtau = (cb, cr) = H^{-1} (C, Cr) (see
 * cr_grad).  NAN if X'WX is not positive definite. */
static double cr_score(const win_t *w, double th, const nbsums *z,
                       const double *cb, double cr, const double *mu) {
  int nc = w->nc;
  double tbar[7], iI[7], schI = z->Irr;
  for (int j = 0; j < nc; j++) {
    if (!(z->I[j] > 0.0))
      return NAN;
    iI[j] = 1.0 / z->I[j];
    tbar[j] = z->Ir[j] * iI[j];
    schI -= z->Ir[j] * tbar[j];
  }
  if (!(schI > 0.0))
    return NAN;
  double isch = 1.0 / schI, dld = 0.0;
  if (nc == 7 && w->n == 21) {
    /* the 21-day windows with weekday effects: two classes at a time,
     * as nb_kernel_p21 (each lane's terms as below; the sum in another
     * order) */
    const tf_v2d zero = {0.0, 0.0};
    tf_v2d acc[2] = {zero, zero};
    for (int q = 0; q < 4; q++) {
      int ja = q < 3 ? 2 * q : 6, jb = q < 3 ? 2 * q + 1 : 6, a = q == 3;
      size_t ta = cls_first(w, ja), tb = cls_first(w, jb);
      tf_v2d cbv = {cb[ja], cb[jb]}, tbv = {tbar[ja], tbar[jb]};
      tf_v2d iIv = {iI[ja], iI[jb]};
      tf_v2d tt = {(double)(int)ta, (double)(int)tb};
      const tf_v2d seven = {7.0, 7.0};
      for (size_t k = 0; k < 3; k++, tt += seven) {
        size_t t[2] = {ta + 7 * k, tb + 7 * k};
        tf_v2d m, id;
        if (w->used == 21) {
          m = (tf_v2d){mu[t[0]], mu[t[1]]};
          id = (tf_v2d){mu[21 + t[0]], mu[21 + t[1]]};
        } else {
          /* a missing day's mean is not kept: a zero term instead */
          m = id = zero;
          for (int l = 0; l < 2; l++)
            if (!tf_isnan(w->y[t[l]])) {
              m[l] = mu[t[l]];
              id[l] = mu[21 + t[l]];
            }
        }
        tf_v2d dW = th * m * (m + th * (cbv + tt * cr)) * id * id;
        tf_v2d d = tt - tbv;
        acc[a] += dW * (iIv + d * d * isch);
      }
    }
    dld = acc[0][0] + acc[0][1] + acc[1][0];
    return th * z->S - 0.5 * dld;
  }
  size_t step = nc == 7 ? 7 : 1;
  for (int j = 0; j < nc; j++) {
    size_t t0 = nc == 7 ? cls_first(w, j) : 0; /* class j's first day */
    for (size_t t = t0; t < w->n; t += step) {
      if (tf_isnan(w->y[t]))
        continue;
      double tt = (double)t, m = mu[t];
      double id = mu[w->n + t]; /* 1/(theta + m), kept by the kernel */
      double dW = th * m * (m + th * (cb[j] + tt * cr)) * id * id;
      double d = tt - tbar[j];
      dld += dW * (iI[j] + d * d * isch);
    }
  }
  return th * z->S - 0.5 * dld;
}

/* Derivative in tau = log theta of the Cox-Reid adjusted profile
 * log-likelihood (Cox & Reid 1987, JRSS B 49:1-39)
 *     l_CR(theta) = l(beta_theta, theta) - 1/2 log det(X'W X),
 * beta_theta the MLE at fixed theta: theta times the score in theta (the
 * envelope theorem) minus half the total derivative of the log
 * determinant, in closed form:
 *     d/dtau log det(X'WX) = sum_t (dW_t/dtau) x_t'(X'WX)^{-1} x_t,
 *     dW_t/dtau = theta mu^2/(theta+mu)^2 + theta^2 mu/(theta+mu)^2 x_t'dbeta,
 * dbeta/dtau = H^{-1} d2l/dbeta dtau (implicit differentiation of the
 * score; H the observed information of beta), the leverages
 * x_t'(X'WX)^{-1}x_t = 1/I_j + (t - tbar_j)^2 / S from the arrow-shaped
 * information (S its Schur complement in r).  p is updated to beta_theta;
 * mu is scratch of 2 w->n doubles. */
static double cr_grad(const win_t *w, nbpar *p, double tau, int maxit,
                      double tol, int *fail, double *mu) {
  p->theta = exp(tau);
  if (nb_beta(w, p, 0, maxit, tol, mu) < 0) {
    *fail = 1;
    return NAN;
  }
  nbsums z;
  nb_kernel(w, p, NBK_BETA | NBK_C | NBK_I | NBK_S, mu, &z);
  double cb[7], cr;
  double g = arrow_solve(&z, w->nc, z.C, z.Cr, cb, &cr) != 0
                 ? NAN
                 : cr_score(w, p->theta, &z, cb, cr, mu);
  if (tf_isnan(g))
    *fail = 1;
  return g;
}

/* The last pass of a converged joint Newton: its point (before the last
 * step) and sums, with NBK_I; the means of that point stay in the
 * scratch array until something else fills it (ok then cleared). */
typedef struct {
  nbpar p;
  nbsums z;
  int ok;
} nblast;

static double cr_fast(const win_t *w, nbpar *p, double tml, double guess,
                      double alt, double slope0, double curv0, double tol,
                      const nblast *last, double *mu, double *se,
                      double *slope, double *curv);

/* The step d to the root of the quadratic model g + s d + c d^2 / 2 (s
 * < 0), from the Newton step -g/s corrected twice by the curvature, or
 * the Newton step itself where the correction would be large (above 30%
 * of s) or c is not known. */
static double cr_qstep(double g, double s, double c) {
  double d0 = -g / s;
  if (!isfinite(c) || !(fabs(0.5 * c * d0) <= 0.3 * fabs(s)))
    return d0;
  double d = -g / (s + 0.5 * c * d0);
  return -g / (s + 0.5 * c * d);
}

/* The Cox-Reid adjusted theta: the root of cr_grad below the ML value,
 * bracketed by stepping down (or, given a guess of log theta, first
 * tried at guess +- 0.02), then refined by the Illinois variant of
 * false position (given a guess, first by cr_fast from the bracket).
 * p (in: the ML fit) gets beta at the adjusted theta; *slope the slope
 * of cr_grad between the last two points (the next window's first guess
 * of it); mu is scratch of 2 w->n doubles. */
static double cr_theta(const win_t *w, nbpar *p, int maxit, double tol,
                       int *fail, double guess, double *mu, double *slope) {
  *slope = NAN;
  double b = log(p->theta), tml = b;
  double gb = cr_grad(w, p, b, maxit, tol, fail, mu);
  if (*fail)
    return NAN;
  if (gb >= 0.0)
    return p->theta; /* at the cap (flat) or already stationary */
  nbpar pa = *p;
  double a = b, ga = gb, step = 0.5;
  int bracketed = 0;
  if (isfinite(guess) && guess < b) {
    double tr[2] = {guess + 0.02, guess - 0.02};
    for (int i = 0; i < 2 && !bracketed; i++) {
      if (!(tr[i] < b))
        continue;
      double gt = cr_grad(w, &pa, tr[i], maxit, tol, fail, mu);
      if (*fail)
        return NAN;
      if (gt > 0.0) {
        a = tr[i];
        ga = gt;
        bracketed = 1;
      } else {
        b = tr[i];
        gb = gt;
        *p = pa;
      }
    }
  }
  for (int k = 0; !bracketed; k++) {
    a = b - step;
    if (a < -20.0 || k > 60) {
      *fail = 1;
      return NAN;
    }
    ga = cr_grad(w, &pa, a, maxit, tol, fail, mu);
    if (*fail)
      return NAN;
    if (ga > 0.0)
      break;
    b = a;
    gb = ga;
    *p = pa;
    step *= 2.0;
  }
  /* g(a) > 0 > g(b), a < b */
  if (isfinite(guess)) {
    /* rolling (a guess given): the secant passes of cr_fast from a, the
     * bracket's end of positive score (beta_theta there); their result
     * is kept if it lies inside the bracket, else false position goes
     * on.  (From the false-position point they would mostly start in
     * the flat tail, where g(b) is nearly 0, and give up.) */
    double se, sl, cvf;
    if (a < tml - 0.5) {
      nbpar pf = pa;
      double th = cr_fast(w, &pf, tml, a, NAN, NAN, NAN, tol, NULL, mu, &se,
                          &sl, &cvf);
      if (th > exp(a) && th < exp(b)) {
        *p = pf;
        *slope = sl;
        return th;
      }
    }
  }
  int side = 0;
  nbpar pc = pa;
  double xl = a, gl = ga; /* the last point, for *slope */
  for (int k = 0; k < 200; k++) {
    double c = (a * gb - b * ga) / (gb - ga);
    if (!(c > a && c < b))
      c = 0.5 * (a + b);
    double gc = cr_grad(w, &pc, c, maxit, tol, fail, mu);
    if (*fail)
      return NAN;
    if (fabs(c - xl) > 1e-6)
      *slope = (gc - gl) / (c - xl);
    xl = c;
    gl = gc;
    if (gc == 0.0 || b - a < 1e-12) {
      *p = pc;
      return exp(c);
    }
    if (gc > 0.0) {
      a = c;
      ga = gc;
      if (side == -1)
        gb *= 0.5;
      side = -1;
    } else {
      b = c;
      gb = gc;
      if (side == 1)
        ga *= 0.5;
      side = 1;
    }
    if (b - a < 1e-11 * (1.0 + fabs(c))) {
      *p = pc;
      return exp(c);
    }
  }
  *fail = 1;
  return NAN;
}

/* ------------------------------------------------------------------ */
/* Warm-started NB2 fits for rolling windows                           */
/* ------------------------------------------------------------------ */

/* Up to k Newton steps on beta at fixed theta from a warm start, without
 * the log-likelihood or the theta score (no logarithm per day), until the
 * Newton decrement is below 1e-2 (on the benchmark districts, 1e-4
 * spends more cheap passes than it saves later, 1e-1 leaves more work
 * to the joint Newton): a rolling window differs from the
 * previous one in two days, whose weekday levels move the most, and
 * these cheap passes bring beta to the new days before the joint Newton
 * (whose passes cost a logarithm and a psi series per day).  *last gets
 * the decrement of the last step taken (INFINITY if none).  Returns -1
 * on a matrix that is not positive definite (beta unchanged then). */
static int nb_beta_pre(const win_t *w, nbpar *p, int k, double *mu,
                       double *last) {
  int nc = w->nc;
  nbpar p0 = *p;
  *last = INFINITY;
  for (int it = 0; it < k; it++) {
    nbsums z;
    nb_kernel(w, p, NBK_BETA, mu, &z);
    double ab[7], ar;
    if (arrow_solve(&z, nc, z.G, z.gr, ab, &ar) != 0 || !isfinite(ar)) {
      *p = p0;
      *last = INFINITY;
      return -1;
    }
    double lam2 = ar * z.gr, mx = fabs(ar) * (double)w->n;
    for (int j = 0; j < nc; j++) {
      lam2 += ab[j] * z.G[j];
      if (fabs(ab[j]) > mx)
        mx = fabs(ab[j]);
    }
    if (!isfinite(lam2) || mx > 5.0) {
      *p = p0;
      *last = INFINITY;
      return -1;
    }
    p->r += ar;
    for (int j = 0; j < nc; j++)
      p->b[j] += ab[j];
    *last = lam2;
    if (lam2 < 1e-2)
      break;
  }
  return 0;
}

/* Joint Newton on (r, b, tau = log theta) with the observed information
 * of all parameters (the beta block arrow-shaped, then the Schur
 * complement in tau), from a start near the maximum (the previous
 * window's estimate).  It replaces the alternation of nb_fit when it
 * converges: every step must see a negative definite Hessian, no step
 * may be wild and theta must stay well below the cap; otherwise it
 * returns -1 and the caller alternates from the same start.  It stops
 * once the Newton decrement is below 1e-2 tol, after that last step.
 * mu is scratch of 2 w->n doubles; last (if not NULL) gets the last pass
 * (ok set) when it converges.
 *
 * With warm set (a rolling window's start, whose caller tries the cap
 * when this returns -1 with theta above 1e5), two more cases are taken
 * in hand.  Where the log-likelihood along beta_theta is not concave in
 * tau (the Schur complement not positive), up to three steps of 1 in
 * tau go the way of the profile score, beta moved along dbeta/dtau, as
 * nb_theta's flat steps do (their decrement is not a convergence test).
 * And in the flat tail of large theta, where dl/dtau tends to 0 as
 * 1/theta and Newton steps in tau stay near 1, a step climbing above
 * theta = e^5 is checked by Newton's step in u = 1/theta on theta
 * dl/dtau (nearly linear in u there: A + B u + ...), which goes to
 * tau - log1p(q), q = d/(d - s), d the profile score and -s its slope:
 * past u = 0 (q <= -1) or above theta = 1e6, the fit is left to the
 * cap at once (theta set to the cap, -1 returned) instead of after the
 * steps up to log(cap) - 2. */
static int nb_joint(const win_t *w, nbpar *p, double tol, double *mu,
                    nblast *last, int warm) {
  int nc = w->nc;
  const double taumax = log(TF_THETA_CAP) - 2.0;
  double tau = log(p->theta);
  double lam2prev = INFINITY, fprev = 0.0;
  int nflat = 0;
  for (int it = 1; it <= 30; it++) {
    nbsums z;
    nb_kernel(w, p, NBK_BETA | NBK_C | NBK_I | NBK_S | NBK_DS, mu, &z);
    nbpar p0 = *p;
    double th = p->theta;
    double gt = th * z.S;                   /* dl/dtau    */
    double hh = th * z.S + th * th * z.DS;  /* d2l/dtau2  */
    double ab[7], ar, cb[7], cr;
    if (arrow_solve2(&z, nc, z.G, z.gr, z.C, z.Cr, ab, &ar, cb, &cr) != 0)
      return -1;
    double ua = ar * z.gr, ca = ar * z.Cr, cc = cr * z.Cr;
    for (int j = 0; j < nc; j++) {
      ua += ab[j] * z.G[j];
      ca += ab[j] * z.C[j];
      cc += cb[j] * z.C[j];
    }
    double scht = -(hh + cc);
    double num = gt + ca;
    /* not concave in tau: a flat step (above) */
    int flat = warm && !(scht > 0.0) && nflat < 3 && isfinite(ua) &&
               isfinite(num) && num != 0.0;
    if (flat) {
      nflat++;
      scht = fabs(num);
    }
    if (!(scht > 0.0) || !isfinite(ua) || !isfinite(gt))
      return -1;
    double dtau = num / scht;
    if (warm && !flat && dtau > 0.5 && tau > 5.0) {
      /* climbing the flat tail: Newton's step in u (above) */
      double q = num / (num - scht);
      if (!(q > -1.0) || tau - log1p(q) > log(1e6)) {
        p->theta = TF_THETA_CAP;
        return -1;
      }
    }
    double lam2 = ua + num * num / scht;
    double dr = ar + cr * dtau, db[7];
    /* damp long steps (theta is loosely determined in short windows) */
    double mx = fabs(dtau) > fabs(dr) * (double)w->n ? fabs(dtau)
                                                    : fabs(dr) * (double)w->n;
    for (int j = 0; j < nc; j++) {
      db[j] = ab[j] + cb[j] * dtau;
      if (fabs(db[j]) > mx)
        mx = fabs(db[j]);
    }
    if (!isfinite(mx))
      return -1;
    double f = mx > 1.0 ? 1.0 / mx : 1.0;
    dtau *= f;
    p->r += f * dr;
    for (int j = 0; j < nc; j++)
      p->b[j] += f * db[j];
    tau += dtau;
    if (!(tau < taumax && tau > -25.0))
      return -1;
    p->theta = exp(tau);
    /* done: a decrement below 1e-2 tol, or, in the quadratic regime
     * (two undamped steps), a predicted next decrement
     * lam2^3 / lam2prev^2 below 1e-11 tol (the prediction is rough: the
     * decrements seen after such a step are up to 1e3 times larger, and
     * still far below 1e-2 tol) */
    int quad = f == 1.0 && fprev == 1.0 && lam2 < 1e-6 &&
               lam2 * lam2 * lam2 < 1e-11 * tol * lam2prev * lam2prev;
    if (flat) {
      /* no test of convergence, nor a quadratic regime, after it */
      quad = 0;
      lam2 = INFINITY;
      f = 0.0;
    }
    lam2prev = lam2;
    fprev = f;
    if ((lam2 < 1e-2 * tol && f == 1.0) || quad) {
      p->capped = 0;
      p->iter = it;
      if (last) {
        last->p = p0;
        last->z = z;
        last->ok = 1;
      }
      return 0;
    }
  }
  return -1;
}

/* The Cox-Reid adjusted theta (the root of cr_grad) from a guess of its
 * log and of the slope of cr_grad in tau (the previous window's), by
 * passes that each take the Newton step of beta at the current tau and
 * the secant step of tau on the adjusted score, beta moved along with
 * dbeta/dtau.  The first pass is at the ML fit (log theta tml), where
 * beta = beta_theta: a non-negative adjusted score there gives the ML
 * theta itself, as cr_theta does; else the step goes to the guess (or
 * by the slope).  Given last (the joint fit's last pass, one tiny Newton
 * step before the ML fit, its means still in mu), the first pass is
 * that one, and a non-negative score there is decided again at the ML
 * fit itself.  A guess more than 0.5 below tml (the ML theta at its cap, the
 * adjusted one far below) is started at instead, with the ML beta.  So is
 * alt, the log of the last adjusted theta below the cap in the rolling run,
 * when the guess is not that far below (the last window's adjusted theta was
 * at the cap as well) and the score at the ML fit is negative: on the
 * benchmark districts this is the usual way out of the cap (the score there
 * tends to 0 and changes sign by about 1e-8) with the root back at 10 to
 * 1000, where the bracketing search stepping down from the cap took about 30
 * kernel passes.  The score is moved to first order by the beta step not yet
 * taken (the mixed derivatives), and the size of that move bounds its
 * error: a secant slope is taken only from scores that differ by more
 * than 10 times their bounds.  The steps use the curvature of the
 * score in tau too (curv0, the previous window's, until two secant
 * slopes of this window at least 1e-4 apart give their own): a secant
 * slope is that of its step's midpoint, moved to the current tau by the
 * curvature, and the step goes to the root of the quadratic model
 * (cr_qstep); the first step from a far guess takes the last window's
 * slope as that of the root.  Where the curvature would move a slope by
 * more than 30%, the plain secant step (on the first 20 benchmark
 * districts 4.7 passes instead of 5.0 from a far guess, 3.4 instead of
 * 3.8 from the ML fit).  The fixed point is the root of cr_grad
 * with beta = beta_theta.  Stops, after those steps, once the beta step
 * is below tol (Newton decrement), the score's bound below 1e-9 times
 * the slope and the tau step below 1e-8 (or below 1e-5 with the error
 * it leaves, by the ratio of the last two steps, below 1e-9), all with
 * a slope of this window at tau (moved there by the curvature) or from
 * a secant over at most 0.05 in tau (in the flat tail of large theta
 * the adjusted score tends to 0, and a step from the previous window's
 * slope alone can look converged; a secant over a long step, from the
 * ML fit, is too far from the slope at tau); then the expected-
 * information SE of r at the result goes to *se.  p (in: the ML fit)
 * gets beta at the adjusted theta; *slope the last secant slope, *curv
 * the curvature (this window's, else curv0).  Returns the adjusted theta, or
 * NAN when it does not converge in 30 passes, a step is wild, theta
 * goes above 1e4 (the flat tail) or tau leaves (tml - 20, tml): the
 * caller then uses cr_theta.
 *
 * The flat tail is recognised before the steps, damped to 0.5, climb
 * into it.  For large theta the Cox-Reid adjusted score (Cox & Reid
 * 1987, JRSS B 49:1-39) behaves as theta g = A + B/theta + ... (both the
 * theta score and the derivative of the log determinant fall as
 * 1/theta), so that theta g is nearly linear in u = 1/theta;
 * the secant step in u (slope dg/dtau = sl, at g) goes to u (1 + g/(g +
 * sl)), that is to tau - log1p(g / (g + sl)), or past u = 0 (no root
 * below the cap) when g / (g + sl) <= -1.  A step climbing from above
 * theta = e^6 that this predicts beyond 1e4 ends the passes: started
 * next to the ML fit (whose adjusted score was negative) at once, the
 * root then lying in the flat tail; started from a far guess, by one
 * pass at the ML fit itself, which decides as pass 0 does (a
 * non-negative score there: the ML theta, as cr_theta would find it
 * first), and otherwise leaves the tail to cr_theta. */
static double cr_fast(const win_t *w, nbpar *p, double tml, double guess,
                      double alt, double slope0, double curv0, double tol,
                      const nblast *last, double *mu, double *se,
                      double *slope, double *curv) {
  int nc = w->nc;
  nbpar q = *p;
  /* a guess more than 0.5 below the ML value: start there, the first
   * pass a Newton step of beta alone; else start at the ML fit */
  int far = isfinite(guess) && guess < tml - 0.5;
  double tau = far ? guess : tml, tprev = NAN, gprev = NAN, egprev = 0.0;
  double dtprev = INFINITY;
  /* without a previous slope, -1 (about its size in short windows) */
  double sl = slope0 < 0.0 && isfinite(slope0) ? slope0 : -1.0;
  int own = 0; /* a secant slope of this window seen */
  /* the curvature of the score in tau: this window's (from its last two
   * secant slopes, at the midpoints mprev and of the last step), else
   * the last window's */
  double cv = isfinite(curv0) ? curv0 : NAN, slprev = NAN, mprev = NAN;
  int owncv = 0;
  double span = INFINITY; /* the tau step the last secant slope spans */
  int tail = 0; /* the flat tail predicted: pass 0 at the ML fit decides */
  const double tmax = log(1e4);
  q.theta = exp(tau);
  if (far)
    last = NULL;
  for (int it = 0; it < 30; it++) {
    nbsums z;
    if (it == 0 && last) {
      /* the joint fit's last pass, next to the ML fit */
      q = last->p;
      z = last->z;
      tau = log(q.theta);
    } else {
      nb_kernel(w, &q, NBK_BETA | NBK_C | NBK_I | NBK_S, mu, &z);
    }
    double th = q.theta;
    double ab[7], ar, cb[7], cr;
    if (arrow_solve2(&z, nc, z.G, z.gr, z.C, z.Cr, ab, &ar, cb, &cr) != 0)
      return NAN;
    double lam2 = ar * z.gr;
    for (int j = 0; j < nc; j++)
      lam2 += ab[j] * z.G[j];
    double g = cr_score(w, th, &z, cb, cr, mu);
    if (!isfinite(g))
      return NAN;
    /* to first order, the score at beta_theta: theta S moves by the
     * mixed derivatives times the Newton step of beta; the log
     * determinant moves too, so the size of that move bounds the error
     * of g (eg) */
    double corr = ar * z.Cr;
    for (int j = 0; j < nc; j++)
      corr += ab[j] * z.C[j];
    g += corr;
    double eg = fabs(corr);
    double dtau;
    if (it == 0 && far) {
      /* sl is the slope at the last window's root, about where this
       * one's lies: with the curvature, the slope at tau is sl - cv d
       * for the step d to the root, so g + sl d - cv d^2 / 2 = 0 */
      dtau = cr_qstep(g, sl, -cv);
    } else if (it == 0) {
      /* at the ML fit, beta = beta_theta: the adjusted score there */
      if (tail && g < 0.0)
        return NAN; /* a root in the flat tail */
      if (g >= 0.0 && last) {
        /* decided at the ML fit itself: pass 0 again, there */
        last = NULL;
        q = *p;
        tau = tml;
        it = -1;
        continue;
      }
      if (g >= 0.0) {
        /* at the cap (flat) or already stationary, as cr_theta */
        *se = nb_se_sums(&z, nc);
        if (!isfinite(*se))
          return NAN;
        *slope = NAN;
        return q.theta;
      }
      if (!(guess < tml - 0.5) && alt < tml - 0.5 && !tail) {
        /* no guess below the ML fit (the last window's adjusted theta
         * was at the cap too) but an earlier one well below: a far
         * start there, as from a guess */
        far = 1;
        guess = alt;
        last = NULL;
        q = *p;
        tau = guess;
        q.theta = exp(tau);
        it = -1;
        continue;
      }
      dtau = isfinite(guess) && guess < tml ? guess - tau : -g / sl;
    } else {
      /* a secant slope only from differences well above the errors */
      double s2 = (g - gprev) / (tau - tprev);
      int fresh = 0;
      if (!tf_isnan(gprev) && s2 < 0.0 && isfinite(s2) &&
          fabs(g - gprev) > 10.0 * (eg + egprev)) {
        /* the curvature from two secant slopes whose midpoints lie at
         * least 1e-4 apart (closer, their errors would dominate it), and
         * only of the size seen (|cv| about |sl| in short windows; at
         * most 20 |sl| taken) */
        double mid = 0.5 * (tau + tprev);
        if (isfinite(slprev) && fabs(mid - mprev) >= 1e-4) {
          double c2 = (s2 - slprev) / (mid - mprev);
          if (isfinite(c2) && fabs(c2) <= 20.0 * fabs(s2)) {
            cv = c2;
            owncv = 1;
          }
        }
        slprev = s2;
        mprev = mid;
        span = fabs(tau - tprev);
        sl = s2;
        own = 1;
        fresh = 1;
      }
      /* this window's last secant slope is that of its midpoint mprev:
       * at tau it is sl + cv (tau - mprev) (where that moves it by less
       * than 30%) */
      double sk = own && isfinite(cv) ? sl + cv * (tau - mprev) : sl;
      if (own && isfinite(cv) && fabs(sk - sl) <= 0.3 * fabs(sl)) {
        dtau = fresh ? cr_qstep(g, sk, cv) : -g / sk;
        span = 0.0; /* a slope at tau itself */
      } else {
        dtau = -g / sl;
      }
    }
    tprev = tau;
    gprev = g;
    egprev = eg;
    if (tf_isnan(dtau))
      return NAN;
    if (dtau > 0.5 && tau > 6.0) {
      /* climbing: the secant step in u = 1/theta (above) */
      double rq = g / (g + sl);
      if (!(rq > -1.0) || tau - log1p(rq) > tmax) {
        if (!far)
          return NAN;
        tail = 1;
        far = 0;
        last = NULL;
        q = *p;
        tau = tml;
        tprev = gprev = NAN;
        it = -1;
        continue;
      }
    }
    if (dtau > 0.5) /* the guess was far: a damped step */
      dtau = 0.5;
    else if (dtau < -0.5)
      dtau = -0.5;
    double dr = ar + cr * dtau;
    if (!(fabs(dr) * (double)w->n <= 2.0))
      return NAN;
    q.r += dr;
    for (int j = 0; j < nc; j++)
      q.b[j] += ab[j] + cb[j] * dtau;
    tau += dtau;
    if (!(tau < tml && tau > tml - 20.0))
      return NAN;
    q.theta = exp(tau);
    /* in the flat tail of large theta the root is ill-determined: leave
     * it to the bracketing search, as the single fit does */
    if (!(q.theta <= 1e4))
      return NAN;
    if (fabs(dtau) == 0.5)
      own = 0; /* a damped step: no convergence yet */
    /* converged: beta's step below tol, the score's error small, and
     * the tau step below 1e-8 or, with the steps shrinking
     * superlinearly (the slope from points less than 1e-3 apart), the
     * error left after it (about dtau times the ratio of the last two
     * steps, which overstates it) below 1e-9 (on the first 300
     * benchmark districts the interval ends stay within 8.3e-10 of those
     * with 1e-14 and a tau step below 1e-11, relative to the larger of
     * |r| and the width; 6.3e-10 with 1e-10, at about 5% more CPU time
     * for the rolling fits) */
    double left = fabs(dtprev) < 1e-3 ? fabs(dtau) * fabs(dtau / dtprev)
                                       : INFINITY;
    dtprev = dtau;
    if (own && span <= 0.05 && lam2 < tol && eg < 1e-9 * fabs(sl) &&
        (fabs(dtau) < 1e-8 || (left < 1e-9 && fabs(dtau) < 1e-5))) {
      nb_stats(w, &q, se, NULL, NULL, mu);
      if (!isfinite(*se))
        return NAN;
      *p = q;
      *slope = sl;
      *curv = owncv ? cv : curv0;
      return q.theta;
    }
  }
  return NAN;
}

/* ------------------------------------------------------------------ */
/* The driver                                                          */
/* ------------------------------------------------------------------ */

static const char *const wdname[7] = {"Monday", "Tuesday", "Wednesday",
                                      "Thursday", "Friday", "Saturday",
                                      "Sunday"};

static int fail(tf_gres *res, int code, const char *fmt, const char *arg,
                double v) {
  res->status = code;
  if (res->quiet)
    return code;
  char tmp[TF_ERRMSG_SIZE];
  if (arg)
    tf_msg_set(tmp, code, fmt, arg, v);
  else
    tf_msg_set(tmp, code, fmt, v);
  memcpy(res->msg, tmp, sizeof tmp);
  return code;
}

static void res_clear(tf_gres *res, int model, int nc, double level) {
  res->status = 0;
  res->flags = 0;
  res->model = model;
  res->nclass = nc;
  res->level = level;
  res->r = res->se = NAN;
  for (int j = 0; j < 7; j++)
    res->b[j] = NAN;
  res->theta = res->theta_cr = res->cr_slope = res->cr_curv = NAN;
  res->cr_alt = NAN;
  res->ll = res->dev = res->pearson = res->disp = NAN;
  res->events = NAN;
  res->used = res->missing = 0;
  res->df = NAN;
  res->iter = 0;
  res->wald[0] = res->wald[1] = NAN;
  res->prof[0] = res->prof[1] = NAN;
  res->small[0] = res->small[1] = NAN;
  res->msg[0] = '\0';
}

/* Scan the window, fill w and check the edge cases.  Returns 0 or a
 * status (message set). */
static int scan(win_t *w, tf_gres *res) {
  int nc = w->nc;
  /* the counts are whole numbers: their sums, and those of y t, are exact
   * in plain arithmetic while below 2^53 (checked after; above, summed
   * again with compensation) */
  double Y = 0.0, T = 0.0, Yc[7] = {0};
  ksum YO = {0, 0};
  for (int j = 0; j < 7; j++) {
    w->cnt[j] = 0;
    w->tfirst[j] = w->tlast[j] = -1;
    w->yfirst[j] = w->ylast[j] = 0.0;
  }
  w->used = 0;
  for (size_t t = 0; t < w->n; t++) {
    double y = w->y[t];
    if (tf_isnan(y))
      continue;
    if (!tf_count_ok(y))
      return fail(res, TWOFOLD_ECOUNT,
                  "invalid count %s%g on window day (not a whole number in "
                  "[0, 2^53])",
                  "", y);
    if (w->off && !isfinite(w->off[t]))
      return fail(res, TWOFOLD_EINVAL, "offset %s%g is not finite", "",
                  w->off[t]);
    int j = cls(w, t);
    w->used++;
    w->cnt[j]++;
    if (w->tfirst[j] < 0) {
      w->tfirst[j] = (long)t;
      w->yfirst[j] = y;
    }
    w->tlast[j] = (long)t;
    w->ylast[j] = y;
    Y += y;
    Yc[j] += y;
    T += y * (double)t;
    if (w->off)
      ks_add(&YO, y * w->off[t]);
  }
  if (!(Y < TF_COUNT_MAX && T < TF_COUNT_MAX)) {
    ksum KY = {0, 0}, KT = {0, 0}, KC[7];
    memset(KC, 0, sizeof KC);
    for (size_t t = 0; t < w->n; t++) {
      double y = w->y[t];
      if (tf_isnan(y))
        continue;
      ks_add(&KY, y);
      ks_add(&KC[cls(w, t)], y);
      ks_add(&KT, y * (double)t);
    }
    Y = ks_val(&KY);
    T = ks_val(&KT);
    for (int j = 0; j < 7; j++)
      Yc[j] = ks_val(&KC[j]);
  }
  w->Ytot = Y;
  w->T = T;
  w->yo = ks_val(&YO);
  for (int j = 0; j < nc; j++)
    w->Y[j] = Yc[j];
  return 0;
}

/* The edge cases, from the window's sums. */
static int checks(win_t *w, const struct twofold_fit_options *o,
                  tf_gres *res, int need_extra) {
  int nc = w->nc;
  res->used = w->used;
  res->missing = w->n - w->used;
  res->events = w->Ytot;
  if (res->missing > 0)
    res->flags |= TWOFOLD_FIT_MISSING_DAYS;
  if (w->Ytot > TF_LARGE_COUNTS)
    res->flags |= TWOFOLD_FIT_LARGE_COUNTS;
  if (w->used == 0)
    return fail(res, TWOFOLD_ENODATA, "no day with data in the window%s%.0f",
                "", 0.0);
  if (nc == 7)
    for (int j = 0; j < 7; j++)
      if (w->cnt[j] == 0)
        return fail(res, TWOFOLD_EWEEKDAY,
                    "weekday effects are on but no %s is present in the "
                    "window (%.0f days used); turn weekday effects off or "
                    "widen the window",
                    wdname[j], (double)w->used);
  size_t p = (size_t)nc + 1;
  if (w->used < p + 1 + (size_t)need_extra) {
    if (!res->quiet) {
      char tmp[TF_ERRMSG_SIZE];
      tf_msg_set(tmp, TWOFOLD_ENODATA,
                 "%zu days with data, need at least %zu for %zu parameters",
                 w->used, p + 1 + (size_t)need_extra, p + (size_t)need_extra);
      memcpy(res->msg, tmp, sizeof tmp);
    }
    res->status = TWOFOLD_ENODATA;
    return TWOFOLD_ENODATA;
  }
  if (w->Ytot == 0.0)
    return fail(res, TWOFOLD_EZERO, "all %s%.0f counts in the window are zero",
                "", (double)w->used);
  if (w->Ytot < o->min_events)
    return fail(res, TWOFOLD_EFEWEVENTS,
                "%s%.0f events in the window, fewer than the minimum",
                "", w->Ytot);
  for (int j = 0; j < nc; j++)
    if (w->Y[j] == 0.0)
      return fail(res, TWOFOLD_ESEPARATION,
                  "separation: no events on any %s in the window, so its "
                  "weekday effect runs off to -infinity%.0f",
                  wdname[j], 0.0);
  int up = 1, down = 1;
  for (int j = 0; j < nc; j++) {
    if (w->ylast[j] != w->Y[j])
      up = 0;
    if (w->yfirst[j] != w->Y[j])
      down = 0;
  }
  if (up)
    return fail(res, TWOFOLD_ESEPARATION,
                nc == 7 ? "separation: %szeros, then events only on the last "
                          "day of each weekday; the growth rate runs off to "
                          "+infinity%.0f"
                        : "separation: %szeros, then events only on the last "
                          "day; the growth rate runs off to +infinity%.0f",
                "", 0.0);
  if (down)
    return fail(res, TWOFOLD_ESEPARATION,
                nc == 7 ? "separation: %sevents only on the first day of each "
                          "weekday, then zeros; the growth rate runs off to "
                          "-infinity%.0f"
                        : "separation: %sevents only on the first day, then "
                          "zeros; the growth rate runs off to -infinity%.0f",
                "", 0.0);
  return 0;
}

/* Pearson X^2, deviance and log-likelihood of the Poisson fit. */
static void pois_stats(const win_t *w, double r, const double *b,
                       int want_ll, double *pearson, double *dev,
                       double *ll) {
  ksum X2 = {0, 0}, D = {0, 0}, L = {0, 0};
  for (size_t t = 0; t < w->n; t++) {
    double y = w->y[t];
    if (tf_isnan(y))
      continue;
    double eta = offv(w, t) + b[cls(w, t)] + r * (double)t;
    double mu = exp(eta);
    ks_add(&X2, (y - mu) * (y - mu) / mu);
    ks_add(&D, 2.0 * ((y > 0.0 ? y * log(y / mu) : 0.0) - (y - mu)));
    if (want_ll)
      ks_add(&L, y * eta - mu - lfact(y));
  }
  *pearson = ks_val(&X2);
  *dev = ks_val(&D);
  *ll = want_ll ? ks_val(&L) : NAN;
}

/* NB small-sample interval: Wald with the Cox-Reid adjusted theta and a
 * t quantile on the residual degrees of freedom.  See growth.c. */
static int nb_small(const win_t *w, const nbpar *ml, tf_quant *Q, double df,
                    int maxit, double tol, double *lo, double *hi,
                    double *theta_cr, double guess, double alt,
                    double slope0, double curv0, double *slope,
                    double *curv, const nblast *last, double *mu) {
  nbpar p = *ml;
  double se;
  /* warm (rolling): the secant passes of cr_fast; else, or if they fail,
   * the bracketing search */
  *curv = NAN;
  double th = tf_isnan(guess)
                  ? NAN
                  : cr_fast(w, &p, log(ml->theta), guess, alt, slope0, curv0,
                            tol, last, mu, &se, slope, curv);
  if (tf_isnan(th)) {
    int bad = 0;
    p = *ml;
    th = cr_theta(w, &p, maxit, tol, &bad, guess, mu, slope);
    if (bad || !(th > 0.0))
      return -1;
    p.theta = th;
    if (nb_beta(w, &p, 0, maxit, tol, mu) < 0)
      return -1;
    nb_stats(w, &p, &se, NULL, NULL, mu);
  }
  double q = tf_quant_t(Q, df);
  *lo = p.r - q * se;
  *hi = p.r + q * se;
  *theta_cr = th;
  return 0;
}

/* The Poisson and quasi-Poisson fit of a scanned and checked window. */
static int pois_finish(win_t *w, const struct twofold_fit_options *o,
                       unsigned want, double r0, tf_quant *Q, tf_gres *res) {
  int model = o->model;
  double z = Q->z;
  double c = Q->c;
  double r, h;
  int it = pois_solve(w, r0, o->max_iter, o->tol, &r, &h);
  if (it < 0)
    return fail(res, TWOFOLD_ENOCONV,
                "Poisson fit did not converge in %s%.0f iterations", "",
                (double)o->max_iter);
  double b[7];
  double lhat = pois_prof(w, r, NULL, NULL, b);
  res->r = r;
  res->se = 1.0 / sqrt(h);
  memcpy(res->b, b, sizeof b);
  res->iter = it;
  res->theta = INFINITY;
  if (!w->geom || model == TWOFOLD_MODEL_QUASIPOISSON ||
      (want & TF_WANT_LOGLIK)) {
    pois_stats(w, r, b, (want & TF_WANT_LOGLIK) != 0, &res->pearson,
               &res->dev, &res->ll);
    res->disp = res->pearson / res->df;
  }
  double q = z, cc = c;
  if (model == TWOFOLD_MODEL_QUASIPOISSON) {
    res->se *= sqrt(res->disp);
    q = tf_quant_t(Q, res->df);
    cc = 0.5 * q * q * res->disp;
  }
  if (want & (TF_WANT_WALD | TF_WANT_SMALL)) {
    res->wald[0] = res->r - q * res->se;
    res->wald[1] = res->r + q * res->se;
  }
  if ((want & TF_WANT_PROFILE) ||
      ((want & TF_WANT_SMALL) && model == TWOFOLD_MODEL_POISSON)) {
    prof_ctx pc;
    memset(&pc, 0, sizeof pc);
    pc.w = w;
    pc.model = model;
    double st = q * res->se;
    res->prof[0] = prof_root(&pc, r, lhat, lhat - cc, -1.0, st, NULL);
    res->prof[1] = prof_root(&pc, r, lhat, lhat - cc, +1.0, st, NULL);
    if (tf_isnan(res->prof[0]) || tf_isnan(res->prof[1]))
      return fail(res, TWOFOLD_ENOCONV,
                  "profile-likelihood interval search failed%s%.0f", "", 0.0);
  }
  /* Poisson: small-sample = profile (no nuisance dispersion);
   * quasi-Poisson: small-sample = Wald with t_{n-p} (already). */
  if (want & TF_WANT_SMALL) {
    const double *v = model == TWOFOLD_MODEL_POISSON ? res->prof : res->wald;
    res->small[0] = v[0];
    res->small[1] = v[1];
  }
  return 0;
}

/* ------------------------------------------------------------------ */
/* Complete windows without offset: the profile from two geometric      */
/* groups                                                               */
/* ------------------------------------------------------------------ */

/* In a complete window the weekday classes have only two lengths La and
 * La + 1 (one length without weekday effects) and class j starts on day
 * u0_j, so with U = sum_j Y_j u0_j the Poisson profile log-likelihood is
 *     l_p(r) = r (T - U) - YA G(s r, La) - YB G(s r, La + 1),
 * G(x, L) = log sum_{k<L} e^{x k}, s the class step (7, or 1), YA and YB
 * the events of the classes of each length.  Both groups' power sums
 * share q = e^{-|x|}: one exponential per evaluation.  The sums are taken
 * from the heavy end (k' = L-1-k when x > 0), so no term exceeds 1. */
typedef struct {
  double s;      /* class step */
  int La, nb;    /* shorter length; nb = 1 if there is a group of La+1 */
  double YA, YB; /* events in each group */
  double Tp;     /* T - U */
  /* windows with missing days (gen = 1): one group per class, of
   * length Lg[i] with the days of mask bit k present; weights Yg */
  int gen, ng, Lg[7];
  unsigned long mk[7];
  double Yg[7];
} gprof;

#define GP_MAXL 48 /* longer classes use the closed forms of tf_geom */

typedef struct {
  double lE, m, V, K3; /* log sum, mean, variance, third central moment */
} gmom;

/* The moments of one group from its power sums S_j = sum p_k (k' - c)^j,
 * p_k = e^{-|x| k'}, k' counted from the heavy end (k' = L-1-k when
 * x > 0): mean, variance and third central moment of k under e^{x k},
 * and (if need_log) log sum e^{x k}. */
static void gmom_set(gmom *o, double S0, double S1, double S2, double S3,
                     double c, int L, double x, int need_log) {
  double i0 = 1.0 / S0;
  double mc = S1 * i0; /* mean of k' - c */
  double v = S2 * i0 - mc * mc;
  double k3 = S3 * i0 - 3.0 * mc * S2 * i0 + 2.0 * mc * mc * mc;
  double mk = c + mc; /* mean of k' */
  o->V = v > 0.0 ? v : 0.0;
  if (x > 0.0) {
    o->m = (double)(L - 1) - mk;
    o->K3 = -k3;
    o->lE = need_log ? x * (double)(L - 1) + log(S0) : NAN;
  } else {
    o->m = mk;
    o->K3 = k3;
    o->lE = need_log ? log(S0) : NAN;
  }
}

/* The moments of k under e^{x k}, k < La and k < La + 1 (if g->nb); lE
 * only when need_log. */
static void gp_moments(const gprof *g, double r, int need_log, gmom *A,
                       gmom *B) {
  double x = g->s * r;
  int La = g->La, Lb = La + g->nb;
  if (Lb > GP_MAXL) {
    double d = 1e-4 / (double)Lb; /* K3 by a central difference of V */
    double lE, m, Vp, Vm;
    tf_geom(x, (double)La, &A->lE, &A->m, &A->V);
    tf_geom(x + d, (double)La, &lE, &m, &Vp);
    tf_geom(x - d, (double)La, &lE, &m, &Vm);
    A->K3 = (Vp - Vm) / (2.0 * d);
    if (g->nb) {
      tf_geom(x, (double)Lb, &B->lE, &B->m, &B->V);
      tf_geom(x + d, (double)Lb, &lE, &m, &Vp);
      tf_geom(x - d, (double)Lb, &lE, &m, &Vm);
      B->K3 = (Vp - Vm) / (2.0 * d);
    }
    return;
  }
  double q = exp(-fabs(x));
  double c = 0.5 * (double)(La - 1); /* centre: fewer cancellations */
  double p = 1.0, S0 = 0.0, S1 = 0.0, S2 = 0.0, S3 = 0.0;
  for (int k = 0; k < La; k++) {
    double u = (double)k - c, pu = p * u, pu2 = pu * u;
    S0 += p;
    S1 += pu;
    S2 += pu2;
    S3 += pu2 * u;
    p *= q;
  }
  gmom *G[2] = {A, B};
  for (int gi = 0; gi <= g->nb; gi++) {
    int L = gi ? Lb : La;
    if (gi) {
      double u = (double)La - c, pu = p * u, pu2 = pu * u;
      S0 += p;
      S1 += pu;
      S2 += pu2;
      S3 += pu2 * u;
    }
    gmom_set(G[gi], S0, S1, S2, S3, c, L, x, need_log);
  }
}

/* The same moments for each class of a window with missing days (the
 * present days of class i are the bits of mk[i]); one exponential. */
static void gp_moments_gen(const gprof *g, double r, int need_log, gmom *M) {
  double x = g->s * r;
  double q = exp(-fabs(x));
  for (int i = 0; i < g->ng; i++) {
    int L = g->Lg[i];
    double c = 0.5 * (double)(L - 1);
    double p = 1.0, S0 = 0.0, S1 = 0.0, S2 = 0.0, S3 = 0.0;
    for (int k = 0; k < L; k++) {
      int kk = x > 0.0 ? L - 1 - k : k; /* the day, from the heavy end */
      if ((g->mk[i] >> kk) & 1ul) {
        double u = (double)k - c, pu = p * u, pu2 = pu * u;
        S0 += p;
        S1 += pu;
        S2 += pu2;
        S3 += pu2 * u;
      }
      p *= q;
    }
    gmom_set(&M[i], S0, S1, S2, S3, c, L, x, need_log);
  }
}

/* l_p' = d1, -l_p'' = h and l_p''' = d3 at r; the moments of each group
 * in M (two groups, A and B, for a complete window). */
static void gp_eval(const gprof *g, double r, int need_log, double *d1,
                    double *h, double *d3, gmom *M) {
  double s = g->s;
  if (g->gen) {
    gp_moments_gen(g, r, need_log, M);
    double a = 0.0, b = 0.0, c = 0.0;
    for (int i = 0; i < g->ng; i++) {
      a += g->Yg[i] * M[i].m;
      b += g->Yg[i] * M[i].V;
      c += g->Yg[i] * M[i].K3;
    }
    *d1 = g->Tp - s * a;
    *h = s * s * b;
    *d3 = -s * s * s * c;
    return;
  }
  gmom *A = &M[0], *B = &M[1];
  B->m = B->V = B->K3 = B->lE = 0.0;
  gp_moments(g, r, need_log, A, B);
  *d1 = g->Tp - s * (g->YA * A->m + g->YB * B->m);
  *h = s * s * (g->YA * A->V + g->YB * B->V);
  *d3 = -s * s * s * (g->YA * A->K3 + g->YB * B->K3);
}

/* sum over groups of Y_i (lE_i at M minus lE_i at Mh) */
static double gp_dlog(const gprof *g, const gmom *M, const gmom *Mh) {
  if (g->gen) {
    double d = 0.0;
    for (int i = 0; i < g->ng; i++)
      d += g->Yg[i] * (M[i].lE - Mh[i].lE);
    return d;
  }
  return g->YA * (M[0].lE - Mh[0].lE) +
         (g->nb ? g->YB * (M[1].lE - Mh[1].lE) : 0.0);
}

/* The end on side sd (+1/-1) of {r : l_p(rhat) - l_p(r) <= cc}: Halley's
 * method on f(r) = l_p(r) - l_p(rhat) + cc from x0, safeguarded by
 * Newton (l_p is concave, so Newton from beyond the end moves
 * monotonically onto it).  Differences of G are taken group by group, so
 * no large log-likelihood values are subtracted.  NaN on failure. */
static double gp_root(const gprof *g, double rhat, const gmom *Mh,
                      double cc, double sd, double x0, double scale,
                      int maxit) {
  double x = x0;
  for (int it = 0; it < maxit; it++) {
    gmom M[7];
    double d1, h, d3;
    gp_eval(g, x, 1, &d1, &h, &d3, M);
    double f = (x - rhat) * g->Tp - gp_dlog(g, M, Mh) + cc;
    if (!(sd * d1 < 0.0) || !isfinite(f))
      return NAN;
    double dn = -f / d1;                /* Newton   */
    double den = 2.0 * d1 * d1 + f * h; /* f'' = -h */
    double dx = den > 0.0 ? -2.0 * f * d1 / den : dn; /* Halley */
    if (!(fabs(dx) <= 2.0 * fabs(dn)))
      dx = dn;
    if (sd * (x + dx - rhat) <= 0.0)
      dx = 0.5 * (rhat - x); /* stay on this side */
    x += dx;
    if (fabs(dx) < 1e-5 * scale)
      return x;
  }
  return NAN;
}

/* The Poisson and quasi-Poisson fit of a complete window from its sums.
 * Returns 0 (done), or 1 when the caller should use the general path. */
static int geom_fast(win_t *w, const struct twofold_fit_options *o,
                     unsigned want, double r0, const double *hint,
                     tf_quant *Q, tf_gres *res) {
  int nc = w->nc, model = o->model;
  gprof g;
  memset(&g, 0, sizeof g);
  double U = 0.0;
  if (nc == 7) {
    g.s = 7.0;
    g.La = (int)(w->n / 7);
    int extra = (int)(w->n % 7);
    g.nb = extra > 0;
    for (int j = 0; j < 7; j++) {
      U += w->Y[j] * w->u0[j];
      if (w->u0[j] < (double)extra)
        g.YB += w->Y[j];
      else
        g.YA += w->Y[j];
    }
  } else {
    g.s = 1.0;
    g.La = (int)w->n;
    g.YA = w->Ytot;
  }
  g.Tp = w->T - U;
  if (w->used < w->n) {
    /* missing days: one group per class, present days as a mask */
    g.gen = 1;
    g.ng = nc;
    size_t step = nc == 7 ? 7 : 1;
    for (int j = 0; j < nc; j++) {
      int L = (int)w->L[j];
      if (L > GP_MAXL)
        return 1;
      g.Lg[j] = L;
      g.Yg[j] = w->Y[j];
      g.mk[j] = 0;
      for (int k = 0; k < L; k++)
        if (!tf_isnan(w->y[(size_t)w->u0[j] + step * (size_t)k]))
          g.mk[j] |= 1ul << k;
    }
  }
  /* Halley (the third derivative is at hand), safeguarded as pois_solve;
   * it stops once the Newton decrement is below 1e-8 tol, taking that
   * last Newton step: its error, and that of the curvature taken before
   * it, are then far below the single fit's */
  double r = isfinite(r0) ? r0 : 0.0;
  double lo = -INFINITY, hi = INFINITY, d1, h, d3;
  gmom Mh[7];
  int it, done = 0;
  for (it = 1; it <= o->max_iter; it++) {
    gp_eval(&g, r, 0, &d1, &h, &d3, Mh);
    if (!(h > 0.0) || !isfinite(d1))
      return 1;
    double step = d1 / h;
    double lam2 = d1 * step;
    if (lam2 < 1e-8 * o->tol) {
      r += step;
      done = 1;
      break;
    }
    if (d1 > 0.0)
      lo = r > lo ? r : lo;
    else
      hi = r < hi ? r : hi;
    /* Halley: root of g = l_p', g' = -h, g'' = d3 */
    double den = 2.0 * h * h - d1 * d3;
    double hs = den > 0.0 ? 2.0 * d1 * h / den : step;
    if (fabs(hs) <= 2.0 * fabs(step))
      step = hs;
    if (step > 0.5)
      step = 0.5;
    else if (step < -0.5)
      step = -0.5;
    double rn = r + step;
    if (!(rn > lo && rn < hi) && isfinite(lo) && isfinite(hi))
      rn = 0.5 * (lo + hi);
    r = rn;
  }
  if (!done)
    return 1;
  double se = 1.0 / sqrt(h);
  res->r = r;
  res->se = se;
  res->iter = it;
  res->theta = INFINITY;
  int need_b = model == TWOFOLD_MODEL_QUASIPOISSON || (want & TF_WANT_LOGLIK);
  int need_prof = (want & TF_WANT_PROFILE) ||
                  ((want & TF_WANT_SMALL) && model == TWOFOLD_MODEL_POISSON);
  if (need_b || need_prof) {
    /* the log sums at the estimate (also the base of the profile) */
    gp_eval(&g, r, 1, &d1, &h, &d3, Mh);
    /* the weekday levels, only where something uses them (the Pearson
     * and deviance pass); rolling Poisson windows start from r alone */
    for (int j = 0; need_b && j < nc; j++) {
      int gi = g.gen ? j
                     : (nc == 7 && g.nb && w->u0[j] < (double)(w->n % 7));
      double lE = r * w->u0[j] + Mh[gi].lE;
      res->b[j] = log(w->Y[j]) - lE;
    }
  }
  if (model == TWOFOLD_MODEL_QUASIPOISSON || (want & TF_WANT_LOGLIK)) {
    pois_stats(w, r, res->b, (want & TF_WANT_LOGLIK) != 0, &res->pearson,
               &res->dev, &res->ll);
    res->disp = res->pearson / res->df;
  }
  double q = Q->z, cc = Q->c;
  if (model == TWOFOLD_MODEL_QUASIPOISSON) {
    res->se *= sqrt(res->disp);
    q = tf_quant_t(Q, res->df);
    cc = 0.5 * q * q * res->disp;
  }
  double st = q * res->se;
  if (want & (TF_WANT_WALD | TF_WANT_SMALL)) {
    res->wald[0] = r - st;
    res->wald[1] = r + st;
  }
  if (need_prof) {
    double sc = st + 1e-300;
    double x0lo = r - st, x0hi = r + st;
    if (hint && hint[0] < 0.0 && hint[1] > 0.0) {
      x0lo = r + hint[0];
      x0hi = r + hint[1];
    }
    int mi = 60;
    res->prof[0] = gp_root(&g, r, Mh, cc, -1.0, x0lo, sc, mi);
    res->prof[1] = gp_root(&g, r, Mh, cc, +1.0, x0hi, sc, mi);
    if (tf_isnan(res->prof[0]) || tf_isnan(res->prof[1]))
      return 1;
  }
  if (want & TF_WANT_SMALL) {
    const double *v = model == TWOFOLD_MODEL_POISSON ? res->prof : res->wald;
    res->small[0] = v[0];
    res->small[1] = v[1];
  }
  return 0;
}

static void win_init(win_t *w, const struct twofold_fit_options *o,
                     const double *y, const double *off, size_t n, int wd0) {
  memset(w, 0, sizeof *w);
  w->n = n;
  w->y = y;
  w->off = off;
  w->wd0 = wd0;
  w->nc = o->weekday ? 7 : 1;
}

int tf_growth_geom(const struct twofold_fit_options *o, const double *y,
                   size_t n, size_t nmiss, int wd0, const double *Yk,
                   double T, unsigned want, double r0, const double *hint,
                   tf_quant *Q, tf_gres *res) {
  win_t w;
  win_init(&w, o, y, NULL, n, wd0);
  int nc = w.nc;
  res_clear(res, o->model, nc, o->level);
  res->wd0 = wd0;
  w.geom = 1;
  w.used = n - nmiss;
  w.T = T;
  double Ytot = 0.0;
  for (int k = 0; k < 7 && (size_t)k < n; k++)
    Ytot += Yk[k];
  w.Ytot = Ytot;
  if (nc == 7) {
    for (int k = 0; k < 7; k++) {
      int j = (wd0 + k) % 7;
      if ((size_t)k >= n) {
        w.cnt[j] = 0;
        continue;
      }
      size_t L = (n - (size_t)k + 6) / 7;
      size_t last = (size_t)k + 7 * (L - 1);
      w.cnt[j] = L;
      w.L[j] = (double)L;
      w.u0[j] = (double)k;
      w.Y[j] = Yk[k];
      w.tfirst[j] = k;
      w.tlast[j] = (long)last;
      w.yfirst[j] = y[k];
      w.ylast[j] = y[last];
    }
  } else {
    w.cnt[0] = n;
    w.L[0] = (double)n;
    w.u0[0] = 0.0;
    w.Y[0] = Ytot;
    w.tfirst[0] = 0;
    w.tlast[0] = (long)n - 1;
    w.yfirst[0] = y[0];
    w.ylast[0] = y[n - 1];
  }
  if (nmiss > 0) {
    /* the present days of each class: count, first and last */
    size_t step = nc == 7 ? 7 : 1;
    for (int j = 0; j < nc; j++) {
      if (w.cnt[j] == 0)
        continue;
      size_t L = w.cnt[j], u = (size_t)w.u0[j];
      w.cnt[j] = 0;
      w.tfirst[j] = w.tlast[j] = -1;
      for (size_t k = 0; k < L; k++) {
        size_t t = u + step * k;
        if (tf_isnan(y[t]))
          continue;
        w.cnt[j]++;
        if (w.tfirst[j] < 0) {
          w.tfirst[j] = (long)t;
          w.yfirst[j] = y[t];
        }
        w.tlast[j] = (long)t;
        w.ylast[j] = y[t];
      }
    }
  }
  int rc = checks(&w, o, res, 0);
  if (rc)
    return rc;
  res->df = (double)(w.used - (size_t)nc - 1);
  if (geom_fast(&w, o, want, r0, hint, Q, res) == 0)
    return 0;
  /* the general path reports any failure */
  unsigned fl = res->flags;
  res_clear(res, o->model, nc, o->level);
  res->wd0 = wd0;
  res->flags = fl;
  res->used = w.used;
  res->missing = nmiss;
  res->events = w.Ytot;
  res->df = (double)(w.used - (size_t)nc - 1);
  if (nmiss > 0)
    w.geom = 0; /* the closed forms assume whole classes */
  return pois_finish(&w, o, want, r0, Q, res);
}

int tf_growth_core(const struct twofold_fit_options *o, const double *y,
                   const double *off, size_t n, int wd0, unsigned want,
                   const tf_gres *warm, tf_quant *Q, tf_gres *res) {
  int model = o->model;
  tf_quant Qlocal;
  if (Q == NULL) {
    tf_quant_init(&Qlocal, o->level);
    Q = &Qlocal;
  }
  win_t w;
  win_init(&w, o, y, off, n, wd0);
  int nc = w.nc;
  res_clear(res, model, nc, o->level);
  res->wd0 = wd0;
  int rc = scan(&w, res);
  if (rc == 0)
    rc = checks(&w, o, res, model == TWOFOLD_MODEL_NEGBIN ? 1 : 0);
  if (rc)
    return rc;
  const size_t p = (size_t)nc + 1;
  res->df = (double)(w.used - p);
  int wuse = warm && warm->status == 0 && warm->model == model &&
             warm->nclass == nc && isfinite(warm->r);
  if (model != TWOFOLD_MODEL_NEGBIN)
    return pois_finish(&w, o, want, wuse ? warm->r : 0.0, Q, res);

  /* NB2: start from the Poisson fit (or the warm start) */
  double z = Q->z;
  double c = Q->c;
  /* the means of the present days, then (passes with NBK_C) their
   * 1/(theta + mu) */
  double mubuf[2 * 64];
  double *muheap = w.n <= 64 ? NULL : malloc(2 * w.n * sizeof *muheap);
  double *mu = w.n <= 64 ? mubuf : muheap;
  if (mu == NULL)
    return fail(res, TWOFOLD_ENOMEM, "out of memory%s%.0f", "", 0.0);
  nbpar np;
  memset(&np, 0, sizeof np);
  int it = 0;
  if (wuse && isfinite(warm->theta) && warm->theta > 0.0) {
    np.r = warm->r;
    memcpy(np.b, warm->b, sizeof np.b);
    np.theta = warm->theta;
  } else {
    double r, h;
    it = pois_solve(&w, 0.0, o->max_iter, o->tol, &r, &h);
    if (it < 0) {
      free(muheap);
      return fail(res, TWOFOLD_ENOCONV,
                  "Poisson start did not converge in %s%.0f iterations", "",
                  (double)o->max_iter);
    }
    np.r = r;
    pois_prof(&w, r, NULL, NULL, np.b);
    /* moment start, as MASS: theta0 = n / sum (y/mu - 1)^2 */
    nb_mu(&w, &np, mu);
    double s = 0.0;
    for (size_t t = 0; t < n; t++) {
      if (tf_isnan(y[t]))
        continue;
      double d = y[t] / mu[t] - 1.0;
      s += d * d;
    }
    double th0 = (double)w.used / s;
    if (!(th0 > 0.0) || th0 > TF_THETA_CAP)
      th0 = TF_THETA_CAP;
    if (th0 < 1.4e-11) /* e^-25, the floor of the theta search */
      th0 = 1.4e-11;
    np.theta = th0;
  }
  /* warm: joint Newton; from a capped start, beta at the cap and the
   * sign of the theta score there; else (or if these fail) alternate */
  int done = 0;
  nblast jl;
  jl.ok = 0;
  if (wuse && isfinite(warm->theta) && warm->theta > 0.0) {
    nbpar np0 = np;
    int tocap = !(warm->theta < TF_THETA_CAP);
    if (!tocap) {
      /* a joint fit in the flat tail (theta above 1e5) is left to the
       * alternation, as the single fit's; but first the cap is tried
       * from the previous window's beta, as after a capped window (the
       * alternation, run up the flat tail, mostly ends there) */
      double last;
      /* one step: with the paired kernel, a second and third one cost
       * more than the joint Newton passes they saved (on the first 20
       * benchmark districts 1.7% fewer instructions with one; interval
       * ends within 6.7e-10 of three over 600) */
      (void)nb_beta_pre(&w, &np, 1, mu, &last);
      done = nb_joint(&w, &np, o->tol, mu, &jl, 1) == 0 && np.theta <= 1e5;
      if (!done && np.theta > 1e5) {
        np = np0;
        tocap = 1;
      }
    }
    if (tocap) {
      jl.ok = 0;
      np.theta = TF_THETA_CAP;
      /* the pre-steps' last decrement: nb_beta need not guard a first
       * step that small with the log-likelihood */
      double last;
      (void)nb_beta_pre(&w, &np, 3, mu, &last);
      int itb = nb_beta_from(&w, &np, 0, o->max_iter, o->tol, mu, last);
      if (itb >= 0) {
        double dec = INFINITY;
        nb_mu(&w, &np, mu);
        /* steps of 3 in the flat tail, and few: from the cap, the joint
         * Newton polishes whatever start nb_theta gives */
        double dt = 0.0;
        if (nb_cap_up(&w, mu)) {
          /* what nb_theta gives when the score at the cap is positive */
          np.theta = exp(log(TF_THETA_CAP));
          np.capped = 1;
        } else {
          dt = nb_theta(&w, &np, mu, 3.0, 6, &dec);
        }
        done = np.capped && dt == 0.0;
        np.iter = itb + 1;
        if (!done && !np.capped && isfinite(dt)) {
          /* theta leaves the cap: the joint Newton from beta at the cap
           * and theta after the Newton steps of nb_theta, unless it ends
           * in the flat tail (theta above 1e5), where the alternation
           * settles whether the fit goes back to the cap */
          done = nb_joint(&w, &np, o->tol, mu, &jl, 1) == 0 &&
                 np.theta <= 1e5;
          np.iter += itb + 1;
        }
      }
    }
    if (!done)
      np = np0;
  }
  if (!done)
    jl.ok = 0;
  if (!done) {
    if (nb_fit(&w, &np, 0, o->max_iter, o->tol, mu) != 0) {
      free(muheap);
      return fail(res, TWOFOLD_ENOCONV,
                  "negative binomial fit did not converge (theta %s%g)", "",
                  np.theta);
    }
    /* the alternation stops on small steps, which in flat likelihoods
     * leaves digits; a joint Newton step or two from there polishes
     * them, so that single and rolling fits agree closely */
    if (!np.capped) {
      nbpar pj = np;
      if (nb_joint(&w, &pj, o->tol, mu, NULL, 0) == 0) {
        pj.iter += np.iter;
        np = pj;
      }
    }
  }
  res->r = np.r;
  memcpy(res->b, np.b, sizeof np.b);
  res->theta = np.theta;
  res->iter = it + np.iter;
  if (np.capped)
    res->flags |= TWOFOLD_FIT_THETA_CAPPED;
  if (want & (TF_WANT_LOGLIK | TF_WANT_WALD | TF_WANT_PROFILE))
    jl.ok = 0; /* mu is filled anew below */
  if (want & TF_WANT_LOGLIK) {
    nb_stats(&w, &np, &res->se, &res->pearson, &res->dev, mu);
    res->disp = res->pearson / res->df;
  } else if (want & (TF_WANT_WALD | TF_WANT_PROFILE)) {
    nb_stats(&w, &np, &res->se, NULL, NULL, mu);
  } /* else (rolling, small-sample interval only): no use for the ML SE */
  int need_ll = (want & (TF_WANT_LOGLIK | TF_WANT_PROFILE)) != 0;
  double lhat = need_ll ? nb_loglik(&w, &np) : NAN;
  res->ll = (want & TF_WANT_LOGLIK) ? lhat : NAN;
  if (want & TF_WANT_WALD) {
    res->wald[0] = res->r - z * res->se;
    res->wald[1] = res->r + z * res->se;
  }
  if (want & TF_WANT_PROFILE) {
    prof_ctx pc;
    memset(&pc, 0, sizeof pc);
    pc.w = &w;
    pc.model = model;
    pc.maxit = o->max_iter;
    pc.tol = o->tol;
    pc.mu = mu;
    double st = z * res->se;
    res->prof[0] = prof_root(&pc, np.r, lhat, lhat - c, -1.0, st, &np);
    res->prof[1] = prof_root(&pc, np.r, lhat, lhat - c, +1.0, st, &np);
    if (tf_isnan(res->prof[0]) || tf_isnan(res->prof[1])) {
      free(muheap);
      return fail(res, TWOFOLD_ENOCONV,
                  "profile-likelihood interval search failed%s%.0f", "", 0.0);
    }
  }
  if (want & TF_WANT_SMALL) {
    /* the previous window's adjustment, as a first guess */
    double guess = NAN;
    if (wuse && warm->theta_cr > 0.0 && warm->theta > 0.0 &&
        isfinite(warm->theta_cr) && isfinite(warm->theta)) {
      /* the previous offset from the ML theta; the previous adjusted
       * theta itself when either ML theta is at the cap */
      if (np.capped || warm->theta >= TF_THETA_CAP)
        guess = log(warm->theta_cr);
      else
        guess = log(np.theta) + log(warm->theta_cr) - log(warm->theta);
    }
    double slope0 = wuse ? warm->cr_slope : NAN;
    double curv0 = wuse ? warm->cr_curv : NAN;
    double alt = wuse ? warm->cr_alt : NAN;
    if (nb_small(&w, &np, Q, res->df, o->max_iter, o->tol,
                 &res->small[0], &res->small[1], &res->theta_cr, guess, alt,
                 slope0, curv0, &res->cr_slope, &res->cr_curv,
                 jl.ok ? &jl : NULL, mu) != 0) {
      free(muheap);
      return fail(res, TWOFOLD_ENOCONV,
                  "small-sample interval: adjusted theta search failed%s%.0f",
                  "", 0.0);
    }
    res->cr_alt = res->theta_cr < TF_THETA_CAP ? log(res->theta_cr) : alt;
  }
  free(muheap);
  return 0;
}
