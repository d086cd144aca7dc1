/* SPDX-License-Identifier: GPL-3.0-or-later */
/* Private interface of the growth module (lib/growth.c, lib/growth_fit.c,
 * lib/roll.c); not installed. */
#ifndef TWOFOLD_GROWTH_INTERNAL_H
#define TWOFOLD_GROWTH_INTERNAL_H

#include "internal.h"

#include <math.h>
#include <stddef.h>

/* Cap on the NB2 shape theta: above it the fit is reported as Poisson-like
 * (TWOFOLD_FIT_THETA_CAPPED). */
#define TF_THETA_CAP 1e8
/* Event totals beyond this use (and flag) compensated summation paths. */
#define TF_LARGE_COUNTS 1e15

struct twofold_fit_options {
  int model;
  double level;
  int weekday;
  int interval;
  double min_events;
  int max_iter;
  double tol;
};

/* Quantile helpers on validated arguments (NaN outside their domain). */
double tf_norm_q(double p);          /* standard normal quantile, p in (0,1) */
double tf_z_level(double level);     /* normal quantile at (1 + level) / 2 */
double tf_t_level(double level, double df); /* t_df quantile, same        */
double tf_chisq1_q(double level);    /* chi-square(1) quantile */

/* The quantiles of one interval level, computed once for many windows
 * (the t quantile is kept for the last df asked for). */
typedef struct tf_quant {
  double level;
  double z;  /* normal quantile at (1 + level) / 2 */
  double c;  /* half the chi-square(1) quantile */
  double df, tq;
} tf_quant;
void tf_quant_init(tf_quant *Q, double level);
double tf_quant_t(tf_quant *Q, double df);

/* Which intervals tf_growth_core computes (bit mask). */
#define TF_WANT_WALD 0x1u
#define TF_WANT_PROFILE 0x2u
#define TF_WANT_SMALL 0x4u
#define TF_WANT_ALL 0x7u
#define TF_WANT_LOGLIK 0x8u /* loglik and deviance (lgamma terms) */

/* Numerical result of one window.  Internally the weekday effects are
 * carried as one log-level b[j] per weekday class j (class 0 = ISO
 * weekday 1, or one class when weekday effects are off), which spans the
 * same model as intercept + six sum-to-zero effects. */
typedef struct tf_gres {
  int status;
  unsigned flags;
  int model;
  int nclass;  /* 7 with weekday effects, else 1 */
  int wd0;     /* class of the window's day 0 (0..6) */
  double level;
  double r, se; /* se: model-based (quasi-Poisson: scaled) */
  double b[7];
  double theta;     /* INFINITY for Poisson models */
  double theta_cr;  /* Cox-Reid adjusted theta used by the small interval */
  double cr_slope;  /* slope of its equation in log theta (a warm start) */
  double cr_curv;   /* and its curvature, the slope's derivative (NAN:
                     * none measured) */
  double cr_alt;    /* log of the last theta_cr below the cap in a rolling
                     * run, this window's or an earlier one's (NAN: none) */
  double ll, dev, pearson, disp;
  double events;
  size_t used, missing;
  double df;
  int iter;
  double wald[2], prof[2], small[2];
  int quiet; /* set by the caller (kept by the fit): no message in msg */
  char msg[TF_ERRMSG_SIZE];
} tf_gres;

/* Fit one window: y[0..n-1] (NaN missing), off NULL or n log-offsets,
 * wd0 = ISO weekday of y[0] minus 1.  warm (may be NULL) holds a previous
 * successful estimate of the same model used as the starting point.
 * Returns res->status. */
int tf_growth_core(const struct twofold_fit_options *o, const double *y,
                   const double *off, size_t n, int wd0, unsigned want,
                   const tf_gres *warm, struct tf_quant *Q, tf_gres *res);

/* The Poisson fit of a window without offset from its sums (lib/roll.c):
 * Yk[k] is the sum of the present y[k], y[k+7], ... inside the window,
 * T = sum t*y[t] over present days, nmiss the number of missing (NaN)
 * days; y points at the window's first day (its values are read for the
 * separation checks, the present days of each class when nmiss > 0, and
 * the quasi-Poisson dispersion). */
int tf_growth_geom(const struct twofold_fit_options *o, const double *y,
                   size_t n, size_t nmiss, int wd0, const double *Yk,
                   double T, unsigned want, double r0, const double *hint,
                   struct tf_quant *Q, tf_gres *res);

/* Copy the interval of the given kind (DEFAULT resolved through
 * opt_kind, the options' kind). */
int tf_interval_pick(const tf_gres *res, int kind, int opt_kind, double *lo,
                     double *hi);

/* Closed-form geometric moments (METHODS.md B2): for weights e^{b k},
 * k = 0..L-1, log E0 = log sum e^{bk}, m = mean k, v = variance of k. */
void tf_geom(double b, double L, double *logE0, double *m, double *v);


/* psi(x) - log x and psi'(x) for x >= 10: the asymptotic series of
 * tf_digamma and tf_trigamma (Abramowitz & Stegun 1964, 6.3.18 and
 * 6.4.12, to the x^-14 and x^-15 terms; the next terms are below 1e-16
 * at x = 10) without the shift.  The polynomials in z = 1/x^2 go by
 * Estrin's scheme (pairs of terms, then z^2 and z^4; Knuth 1969, TAOCP
 * vol. 2, 4.6.4): a third of Horner's chain of dependent operations, and
 * the terms fall fast enough (z <= 1e-2) that the order of the additions
 * does not matter to the digits. */
static inline double tf_psi_poly(double z, double z2, double z4) {
  double p01 = 1.0 / 12.0 - z * (1.0 / 120.0);
  double p23 = 1.0 / 252.0 - z * (1.0 / 240.0);
  double p45 = 1.0 / 132.0 - z * (691.0 / 32760.0);
  return p01 + z2 * p23 + z4 * (p45 + z2 * (1.0 / 12.0));
}

static inline double tf_tri_poly(double z, double z2, double z4) {
  double p01 = 1.0 / 6.0 - z * (1.0 / 30.0);
  double p23 = 1.0 / 42.0 - z * (1.0 / 30.0);
  double p45 = 5.0 / 66.0 - z * (691.0 / 2730.0);
  return p01 + z2 * p23 + z4 * (p45 + z2 * (7.0 / 6.0));
}

/* psi(x) - log x and psi'(x) from i = 1/x, and from x. */
static inline double tf_psi_mlog_inv(double i) {
  double z = i * i, z2 = z * z, z4 = z2 * z2;
  return -0.5 * i - z * tf_psi_poly(z, z2, z4);
}

static inline double tf_tri_ser_inv(double i) {
  double z = i * i, z2 = z * z, z4 = z2 * z2;
  return i * (1.0 + i * (0.5 + i * tf_tri_poly(z, z2, z4)));
}

static inline double tf_psi_mlog(double x) { return tf_psi_mlog_inv(1.0 / x); }

static inline double tf_tri_ser(double x) { return tf_tri_ser_inv(1.0 / x); }

/* Digamma and trigamma, x > 0 (lib/growth_psi.c). */
double tf_digamma(double x);
double tf_trigamma(double x);

/* The library's resolution of TWOFOLD_INTERVAL_DEFAULT. */
#define TF_DEFAULT_INTERVAL TWOFOLD_INTERVAL_SMALL

#endif
